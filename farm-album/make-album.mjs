#!/usr/bin/env node
// Rebuilds the farm album (tune/ and test/) from the Debian packages listed in photo-list.tsv:
//   node farm-album/make-album.mjs [--debs DIR]
// Without --debs the packages are fetched with `apt-get download` into a temporary folder. Each photo is a
// tile of a panorama whose sky was cut out: the rows that are at least 60 percent opaque are kept (the
// ground and what stands on it), the few transparent pixels left are laid on a light overcast grey, and
// the result is written as a JPEG of at most 512 px on its long side into tune/ or test/ (the `use` column).
import { execFileSync } from 'node:child_process';
import { mkdtempSync, mkdirSync, readdirSync, readFileSync, renameSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import sharp from 'sharp';

const here = dirname(fileURLToPath(import.meta.url));
const args = process.argv.slice(2);
const debsAt = args.indexOf('--debs');
const work = mkdtempSync(join(tmpdir(), 'kinhue-farm-album-'));
const OPAQUE_SHARE = 0.6;
const LONG_SIDE = 512;

const [header, ...lines] = readFileSync(join(here, 'photo-list.tsv'), 'utf8').split('\n').filter((l) => l.trim());
const columns = header.split('\t');
const rows = lines.map((l) => Object.fromEntries(l.split('\t').map((v, i) => [columns[i], v])));

try {
  const debs = debsAt >= 0 ? resolve(args[debsAt + 1]) : join(work, 'debs');
  const packages = [...new Set(rows.map((r) => `${r.package}=${r.version}`))];
  if (debsAt < 0) {
    mkdirSync(debs);
    execFileSync('apt-get', ['download', ...packages], { cwd: debs, stdio: 'inherit' });
  }
  const unpacked = join(work, 'root');
  mkdirSync(unpacked);
  for (const pkg of new Set(rows.map((r) => r.package))) {
    const deb = readdirSync(debs).find((f) => f.startsWith(`${pkg}_`) && f.endsWith('.deb'));
    if (!deb) throw new Error(`no ${pkg} .deb in ${debs}: run without --debs, or apt-get download ${pkg}`);
    const wanted = rows.filter((r) => r.package === pkg).map((r) => `./${r.path}`);
    execFileSync('sh', ['-c', 'deb=$1; dir=$2; shift 2; dpkg-deb --fsys-tarfile "$deb" | tar -x -C "$dir" "$@"', 'sh', join(debs, deb), unpacked, ...wanted]);
  }
  for (const use of ['tune', 'test']) rmSync(join(here, use), { recursive: true, force: true });
  for (const row of rows) {
    const source = join(unpacked, row.path);
    const { data, info } = await sharp(source).ensureAlpha().raw().toBuffer({ resolveWithObject: true });
    let top = 0;
    for (; top < info.height; top++) {
      let opaque = 0;
      for (let x = 0; x < info.width; x++) if (data[(top * info.width + x) * 4 + 3] === 255) opaque++;
      if (opaque >= OPAQUE_SHARE * info.width) break;
    }
    const height = info.height - top;
    const out = join(here, row.use, row.name);
    mkdirSync(dirname(out), { recursive: true });
    await sharp(source)
      .extract({ left: 0, top, width: info.width, height })
      .flatten({ background: '#d4d6d8' })
      .resize({ width: LONG_SIDE, height: LONG_SIDE, fit: 'inside', withoutEnlargement: true })
      .jpeg({ quality: 90 })
      .toFile(`${out}.tmp`);
    renameSync(`${out}.tmp`, out);
    console.log(`${row.use}/${row.name}: ${info.width} x ${height} of ${info.height} rows`);
  }
} finally {
  rmSync(work, { recursive: true, force: true });
}

import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { cp, mkdir, readdir, readFile } from 'node:fs/promises';
import { join, relative } from 'node:path';
import sharp from 'sharp';

const ROOT = join(__dirname, '..', '..');
const BIN = join(ROOT, 'bin', 'kinhue.js');

/** The restore runs whose outputs are pinned: the demo album as the README restores it, and every option that shapes a result. */
export const DEMO_RUNS: Record<string, (root: string) => string[]> = {
  defaults: () => [],
  options: (root) => [
    '--reference',
    join(root, 'originals', 'wrenfold-05-billy-goat.jpg'),
    '--hints',
    join(root, 'hints'),
    '--format',
    'png',
    '--decoding',
    'annealed-mean',
    '--temperature',
    '0.3',
    '--work-size',
    '256',
    '--no-confidence',
  ],
};

/** Scans of the second run: a hints file found in the --hints folder, the 16-bit TIFF, and one plain scan. */
const OPTION_SCANS = ['wrenfold-04-hill-pony.jpg', 'wrenfold-06-gosling.tif', 'wrenfold-02-spaniels.jpg'];

function sha(data: string | Uint8Array): string {
  return createHash('sha256').update(data).digest('hex');
}

/**
 * Copies the demo album under `root` (scans/, originals/, hints/), restores it with the built CLI and
 * returns a digest of every output: an image's decoded samples and its XMP without the dates and instance ids, a
 * confidence map's bytes, a record and a manifest line without what differs from run to run (times,
 * absolute paths, file times).
 */
export async function restoreDemoAlbum(root: string, run: keyof typeof DEMO_RUNS): Promise<Record<string, string>> {
  const scans = join(root, 'scans');
  await mkdir(scans, { recursive: true });
  const names = run === 'defaults' ? await readdir(join(ROOT, 'demo-photos', 'scans')) : OPTION_SCANS;
  for (const name of names) await cp(join(ROOT, 'demo-photos', 'scans', name), join(scans, name));
  if (run !== 'defaults') {
    await cp(join(ROOT, 'demo-photos', 'originals'), join(root, 'originals'), { recursive: true });
    await mkdir(join(root, 'hints'), { recursive: true });
    await cp(
      join(ROOT, 'demo-photos', 'scans', 'wrenfold-04-hill-pony.hints.json'),
      join(root, 'hints', 'wrenfold-04-hill-pony.hints.json'),
    );
  }
  const out = join(root, 'out');
  const result = spawnSync(process.execPath, [BIN, 'restore', scans, '--out', out, '--jobs', '2', ...DEMO_RUNS[run]!(root)], {
    encoding: 'utf8',
    timeout: 900_000,
  });
  if (result.status !== 0) throw new Error(`restore exited ${result.status}: ${result.stderr}`);
  return digestFolder(out, root, run !== 'defaults');
}

function withoutRunDetails(value: unknown, root: string, drop: string[] = []): unknown {
  return JSON.parse(
    JSON.stringify(value, (key, v: unknown) => {
      if (drop.includes(key)) return undefined;
      if (['created', 'time', 'timings', 'milliseconds', 'seconds', 'mtimeMs', 'pid', 'host', 'folder'].includes(key)) return undefined;
      return typeof v === 'string' ? v.split(root).join('<root>').split(ROOT).join('<repo>') : v;
    }),
  );
}

async function digestFolder(out: string, root: string, pathsNamed: boolean): Promise<Record<string, string>> {
  const digests: Record<string, string> = {};
  const files = (await readdir(out, { recursive: true })).sort();
  for (const name of files) {
    const path = join(out, name);
    const rel = relative(out, path);
    if (rel.endsWith('.kinhue.json')) {
      digests[rel] = sha(JSON.stringify(withoutRunDetails(JSON.parse(await readFile(path, 'utf8')), root)));
    } else if (rel.endsWith('.jsonl')) {
      // The settings key hashes absolute paths when a run names a folder or file: pinned only where none is named.
      const lines = (await readFile(path, 'utf8'))
        .trim()
        .split('\n')
        .map((line) => JSON.stringify(withoutRunDetails(JSON.parse(line), root, pathsNamed ? ['settings'] : [])));
      digests[rel] = sha(JSON.stringify(lines.sort()));
    } else if (rel.endsWith('.confidence.png')) {
      digests[rel] = sha(await readFile(path));
    } else {
      const meta = await sharp(path).metadata();
      const depth = meta.depth === 'ushort' ? 'ushort' : 'uchar';
      const { data, info } = await sharp(path).raw({ depth }).toBuffer({ resolveWithObject: true });
      const xmp = meta.xmp?.toString('utf8') ?? '';
      const packet = xmp.replace(/\d{4}-\d\d-\d\dT[\d:.]+Z/g, '<date>').replace(/xmp\.iid:[0-9a-f-]{36}/g, '<instance>');
      digests[rel] = `${info.width}x${info.height}x${info.channels} ${depth} samples ${sha(data)} xmp ${sha(packet)}`;
    }
  }
  return digests;
}

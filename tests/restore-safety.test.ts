// Never touch an original, and say everything that was not done: outputs that would land on inputs
// (links, hard links, bind mounts), folders that cannot be read, hints not used, a torn manifest,
// long names, parts of a result, stop signals, stale temporary files and results of another album.
// Real files, links, processes and (where the machine allows) bind mounts; an untrained model.
import { spawn, spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { chmod, chown, link, mkdir, mkdtemp, readdir, readFile, rm, stat, symlink, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadManifest, readManifest, restore, type RestoreSummary } from '../src/batch/index.js';
import { formatSummary } from '../src/cli/restore-report.js';
import { NAME_MAX_BYTES } from '../src/files/index.js';
import { greyPng } from './helpers/grey-png.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let modelDir: string;

async function sha(path: string): Promise<string> {
  return createHash('sha256')
    .update(await readFile(path))
    .digest('hex');
}

function cli(
  args: string[],
  env: NodeJS.ProcessEnv = {},
  prefix: string[] = [],
): { status: number | null; stdout: string; stderr: string } {
  const command = prefix.length ? prefix[0]! : process.execPath;
  const argv = prefix.length ? [...prefix.slice(1), process.execPath, BIN, ...args] : [BIN, ...args];
  const r = spawnSync(command, argv, { encoding: 'utf8', timeout: 120_000, env: { ...process.env, ...env } });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

const run = (inputs: string[], out: string, more: Partial<Parameters<typeof restore>[0]> = {}): Promise<RestoreSummary> =>
  restore({ inputs, out, model: modelDir, jobs: 1, workSize: 64, ...more });

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-safety-'));
  await chmod(root, 0o755); // the unprivileged-user test reads below it
  modelDir = join(root, 'model');
  await saveUntrainedModel(modelDir);
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('an output never replaces an input', () => {
  it('refuses an output folder that is a link to the input folder, and an input given through that link (issue 11)', async () => {
    const same = join(root, 'same');
    await mkdir(same);
    await greyPng(join(same, 'calf.png'));
    await symlink(same, join(root, 'same-link'));
    const before = await sha(join(same, 'calf.png'));

    const viaOut = cli(['restore', same, '--out', join(root, 'same-link'), '--model', modelDir, '--jobs', '1']);
    expect(viaOut.status).toBe(2);
    expect(viaOut.stderr).toMatch(/is the output folder/);
    const viaInput = cli(['restore', join(root, 'same-link', 'calf.png'), '--out', same, '--model', modelDir, '--jobs', '1']);
    expect(viaInput.status).toBe(2);
    expect(viaInput.stderr).toMatch(/lies in the output folder/);

    expect(await sha(join(same, 'calf.png'))).toBe(before);
    expect(await readdir(same)).toEqual(['calf.png']); // nothing written
  });

  it('refuses an output folder that is a bind mount of the input folder', async (context) => {
    if (spawnSync('unshare', ['-m', 'true']).status !== 0) context.skip(); // needs mount rights (root)
    const scans = join(root, 'bound-scans');
    const alias = join(root, 'bound-alias');
    await mkdir(scans);
    await mkdir(alias);
    await greyPng(join(scans, 'a.png'));
    const before = await sha(join(scans, 'a.png'));
    const script = `mount --bind "$1" "$2" && exec "$3" "$4" restore "$1" --out "$2" --model "$5" --jobs 1`;
    const r = spawnSync('unshare', ['-m', 'sh', '-c', script, 'sh', scans, alias, process.execPath, BIN, modelDir], {
      encoding: 'utf8',
      timeout: 120_000,
    });
    expect(r.status, r.stderr).toBe(2);
    expect(r.stderr).toMatch(/is the output folder/);
    expect(await sha(join(scans, 'a.png'))).toBe(before);
    expect(await readdir(scans)).toEqual(['a.png']);
  });

  it('refuses each output that leads to an input (a linked subfolder, a hard link) and restores the rest', async () => {
    const top = join(root, 'album');
    await mkdir(join(top, 'scans'), { recursive: true });
    await mkdir(join(top, 'other'), { recursive: true });
    await greyPng(join(top, 'scans', 'a.png'));
    await greyPng(join(top, 'other', 'b.png'));
    await greyPng(join(top, 'other', 'c.png'));
    const out = join(root, 'album-out');
    await mkdir(join(out, 'other'), { recursive: true });
    await symlink(join(top, 'scans'), join(out, 'scans')); // out/scans/a.png is the input a.png
    await link(join(top, 'other', 'c.png'), join(out, 'other', 'c.png')); // out/other/c.png is the input c.png
    const before = await Promise.all(['scans/a.png', 'other/b.png', 'other/c.png'].map((f) => sha(join(top, f))));

    const summary = await run([join(top, 'scans'), join(top, 'other')], out);
    expect(summary.done).toBe(1);
    expect(summary.failed.map((f) => [f.rel, f.code])).toEqual([
      ['other/c.png', 'KH_OUTPUT_ON_INPUT'],
      ['scans/a.png', 'KH_OUTPUT_ON_INPUT'],
    ]);
    expect(summary.failed[0]!.message).toContain(join(top, 'other', 'c.png'));
    expect(summary.failed[0]!.hint).toMatch(/--out/);
    expect(await Promise.all(['scans/a.png', 'other/b.png', 'other/c.png'].map((f) => sha(join(top, f))))).toEqual(before);
    expect((await readdir(join(top, 'scans'))).sort()).toEqual(['a.png']); // no confidence map or record beside the scan
    expect((await readdir(join(out, 'other'))).sort()).toEqual(['b.confidence.png', 'b.kinhue.json', 'b.png', 'c.png']);

    // As JPEG, a's result would be a new file, but still in the scans' own folder through the link: refused too.
    const asJpeg = await run([join(top, 'scans'), join(top, 'other')], out, { format: 'jpeg' });
    expect(asJpeg.failed.map((f) => [f.rel, f.code])).toEqual([['scans/a.png', 'KH_OUTPUT_ON_INPUT']]);
    expect(asJpeg.failed[0]!.message).toMatch(/written into .*the folder of the input/);
    expect(asJpeg.done).toBe(2);
    expect(await readdir(join(top, 'scans'))).toEqual(['a.png']);
  });
});

describe('what was not done is reported', () => {
  it('reports broken links and link loops named on the command line as failures and goes on (exit 1)', async () => {
    const scans = join(root, 'named-links');
    await mkdir(scans);
    await greyPng(join(scans, 'a.png'));
    await symlink(join(scans, 'gone.png'), join(scans, 'broken.png'));
    await symlink(join(scans, 'loop-b.png'), join(scans, 'loop-a.png'));
    await symlink(join(scans, 'loop-a.png'), join(scans, 'loop-b.png'));
    const r = cli([
      'restore',
      join(scans, 'a.png'),
      join(scans, 'broken.png'),
      join(scans, 'loop-a.png'),
      '--out',
      join(root, 'named-out'),
      '--model',
      modelDir,
      '--work-size',
      '64',
      '--jobs',
      '1',
      '--json',
    ]);
    expect(r.status, r.stderr).toBe(1);
    const summary = JSON.parse(r.stdout);
    expect(summary).toMatchObject({ done: 1, total: 3 });
    expect(summary.failed.map((f: { rel: string; code: string }) => [f.rel, f.code])).toEqual([
      ['broken.png', 'KH_UNREADABLE'],
      ['loop-a.png', 'KH_UNREADABLE'],
    ]);
    expect(r.stderr).toMatch(/failed: broken\.png: KH_UNREADABLE .*does not exist/);
  });

  it('reports a sub-folder it cannot read like an unreadable file, as a user without permission', async (context) => {
    const asRoot = process.getuid?.() === 0;
    if (asRoot && spawnSync('setpriv', ['--version']).status !== 0) context.skip();
    const scans = join(root, 'locked-scans');
    const out = join(root, 'locked-out');
    await mkdir(join(scans, 'locked'), { recursive: true });
    await mkdir(out);
    await greyPng(join(scans, 'a.png'));
    await greyPng(join(scans, 'locked', 'b.png'));
    await chmod(join(scans, 'locked'), 0o000);
    // root reads any folder, so the run is made as the unprivileged user `nobody`.
    if (asRoot) await chown(out, 65534, 65534);
    const prefix = asRoot ? ['setpriv', '--reuid=65534', '--regid=65534', '--clear-groups'] : [];
    try {
      const r = cli(['restore', scans, '--out', out, '--model', modelDir, '--work-size', '64', '--jobs', '1', '--json'], {}, prefix);
      expect(r.status, r.stderr).toBe(1);
      const summary = JSON.parse(r.stdout);
      expect(summary.done).toBe(1);
      expect(summary.failed).toEqual([
        expect.objectContaining({
          rel: 'locked',
          code: 'KH_UNREADABLE',
          message: expect.stringMatching(/folder cannot be read \(permission denied\)/),
        }),
      ]);
    } finally {
      await chmod(join(scans, 'locked'), 0o755);
    }
  });

  it('lists hints files not used and a missing --hints folder, with exit code 4', async () => {
    const scans = join(root, 'hinted');
    await mkdir(scans);
    await greyPng(join(scans, 'a.png'));
    await greyPng(join(scans, 'b.png'));
    await writeFile(
      join(scans, 'a.hints.json'),
      '{"format": "kinhue-hints", "version": 1, "image": {"width": 64, "height": 48}, "entries": [',
    );
    await writeFile(
      join(scans, 'b.hints.json'),
      JSON.stringify({ format: 'kinhue-hints', version: 99, image: { width: 64, height: 48 }, entries: [] }),
    );
    const missing = join(root, 'no-such-hints');
    const r = cli([
      'restore',
      scans,
      '--out',
      join(root, 'hinted-out'),
      '--hints',
      missing,
      '--model',
      modelDir,
      '--work-size',
      '64',
      '--jobs',
      '1',
      '--json',
    ]);
    expect(r.status, r.stderr).toBe(4);
    const summary = JSON.parse(r.stdout) as RestoreSummary;
    expect(summary.done).toBe(2);
    expect(summary.failed).toEqual([]);
    expect(summary.hintsNotUsed.map((h) => [h.rel ?? null, h.file])).toEqual([
      [null, missing],
      ['a.png', join(scans, 'a.hints.json')],
      ['b.png', join(scans, 'b.hints.json')],
    ]);
    expect(summary.hintsNotUsed[0]!.reason).toMatch(/does not exist/);
    const text = formatSummary(summary);
    expect(text).toMatch(/hints not used/);
    expect(text).toContain(`a.png: ${join(scans, 'a.hints.json')}`);
  });

  it('repairs a manifest whose last line was cut short, says so, and keeps the next record', async () => {
    const scans = join(root, 'torn');
    const out = join(root, 'torn-out');
    await mkdir(scans);
    await mkdir(out);
    await greyPng(join(scans, 'a.png'));
    const manifest = join(out, 'kinhue-run.jsonl');
    await writeFile(manifest, '{"time":"2024-01-01T00:00:00.000Z","status":"done","source":"/elsewhere/x.png","outp');
    const first = await run([scans], out);
    expect(first.done).toBe(1);
    // The record of this run is not glued onto the torn line, so the next run knows the scan is finished.
    expect((await readManifest(manifest)).get('a.png')?.status).toBe('done');
    const plan = await run([scans], out, { dryRun: true });
    expect(plan.files.map((f) => f.action)).toEqual(['skip']);
    expect(first.notes).toEqual([expect.stringMatching(/line 1 was cut short .* ignored/)]);
    expect((await loadManifest(manifest)).notes).toEqual([expect.stringMatching(/line 1 is not a record/)]);
  });

  it("refuses to replace another album's result under the same name unless --force", async () => {
    const albumA = join(root, 'album-a');
    const albumB = join(root, 'album-b');
    const moved = join(root, 'album-a-moved');
    const out = join(root, 'shared-out');
    for (const d of [albumA, albumB, moved]) await mkdir(d);
    await greyPng(join(albumA, 'p1.png'));
    await greyPng(join(albumB, 'p1.png'), 64, 48, 40); // another photograph, same name
    await greyPng(join(moved, 'p1.png'));
    expect((await run([albumA], out)).done).toBe(1);
    const first = await sha(join(out, 'p1.png'));

    const other = await run([albumB], out);
    expect(other.done).toBe(0);
    expect(other.failed).toEqual([
      expect.objectContaining({ rel: 'p1.png', code: 'KH_OUTPUT_CONFLICT', message: expect.stringContaining(join(albumA, 'p1.png')) }),
    ]);
    expect(other.failed[0]!.hint).toMatch(/--force/);
    expect(await sha(join(out, 'p1.png'))).toBe(first);
    expect((await readManifest(join(out, 'kinhue-run.jsonl'))).get('p1.png')?.source).toBe(join(albumA, 'p1.png'));

    // The same photographs moved to another folder are no conflict: they are finished.
    expect((await run([moved], out)).skipped).toBe(1);
    const forced = await run([albumB], out, { force: true });
    expect(forced.done).toBe(1);
    expect(await sha(join(out, 'p1.png'))).not.toBe(first);
  });
});

describe('files on disk', () => {
  it('restores scans with names of 232 bytes and more, the same names on every run', async () => {
    const scans = join(root, 'long');
    const out = join(root, 'long-out');
    await mkdir(scans);
    const names = [`${'é'.repeat(116)}.png`, `${'x'.repeat(246)}.png`]; // 236 and 250 bytes
    for (const name of names) await greyPng(join(scans, name));
    const first = await run([scans], out);
    expect(first.failed).toEqual([]);
    expect(first.done).toBe(2);
    const written = await readdir(out);
    expect(written.filter((n) => n.endsWith('.tmp'))).toEqual([]);
    expect(written.filter((n) => /\.(png|json)$/.test(n) && n !== 'kinhue-run.jsonl')).toHaveLength(6);
    for (const n of written) expect(Buffer.byteLength(n), n).toBeLessThanOrEqual(NAME_MAX_BYTES);
    expect(written).toContain(names[0]!.replace('.png', '.confidence.png'));
    expect((await run([scans], out)).skipped).toBe(2);
  });

  it('removes the parts of a result already written when another part cannot be', async () => {
    const scans = join(root, 'parts');
    const out = join(root, 'parts-out');
    await mkdir(scans);
    await greyPng(join(scans, 'a.png'));
    await mkdir(join(out, 'a.kinhue.json'), { recursive: true }); // a folder where the record must go
    const summary = await run([scans], out);
    expect((await readdir(out)).sort()).toEqual(['a.kinhue.json', 'kinhue-run.jsonl']); // no image or map without its record
    expect(summary.failed).toEqual([
      expect.objectContaining({ rel: 'a.png', code: 'KH_WRITE_FAILED', message: 'a folder of that name is in the way' }),
    ]);
  });

  it('removes temporary files of processes that are gone, and keeps those of a running one', async () => {
    const scans = join(root, 'stale');
    const out = join(root, 'stale-out');
    await mkdir(join(scans, 'sub'), { recursive: true });
    await mkdir(join(out, 'sub'), { recursive: true });
    await greyPng(join(scans, 'sub', 'a.png'));
    const gone = spawnSync(process.execPath, ['-e', '0']).pid!; // a real process that has ended
    const stale = [`a.png.${gone}.0123abcd.tmp`, `sub/a.png.${gone}.4567cdef.tmp`];
    const live = `b.png.${process.pid}.89abcdef.tmp`;
    for (const name of [...stale, live, 'notes.tmp']) await writeFile(join(out, name), 'partial');
    const summary = await run([scans], out);
    expect(summary.notes).toContain('removed 2 temporary files left by an earlier run that was stopped');
    expect((await readdir(out)).filter((n) => n.endsWith('.tmp')).sort()).toEqual([live, 'notes.tmp']);
    expect((await readdir(join(out, 'sub'))).filter((n) => n.endsWith('.tmp'))).toEqual([]);
  });
});

describe('stop signals', () => {
  it.each(['SIGTERM', 'SIGHUP'] as const)('%s stops cleanly like Ctrl-C: exit 130, finished files complete', async (signal) => {
    const scans = join(root, `signal-${signal}`);
    const out = join(root, `signal-${signal}-out`);
    await mkdir(scans);
    for (let i = 0; i < 4; i++) await greyPng(join(scans, `p${i}.png`), 160, 120, i);
    const child = spawn(process.execPath, [BIN, 'restore', scans, '--out', out, '--model', modelDir, '--work-size', '64', '--jobs', '1'], {
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let stderr = '';
    let sent = false;
    const exit = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    child.stderr.on('data', (chunk: Buffer) => {
      stderr += chunk.toString();
      if (!sent && /done: /.test(stderr)) {
        sent = true;
        child.kill(signal);
      }
    });
    expect(await exit, stderr).toBe(130);
    expect(stderr).toMatch(/stopping/);
    const files = (await readdir(out)).map(String);
    expect(files.filter((f) => f.endsWith('.tmp'))).toEqual([]);
    const finished = [...(await readManifest(join(out, 'kinhue-run.jsonl'))).values()].filter((r) => r.status === 'done');
    expect(finished.length).toBeGreaterThanOrEqual(1);
    expect(finished.length).toBeLessThan(4);
    for (const r of finished) {
      expect(files).toContain(r.output.replace('.png', '.kinhue.json'));
      expect((await stat(join(out, r.output))).size).toBeGreaterThan(0);
    }
  });
});

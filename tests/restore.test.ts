import { spawn, spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdir, mkdtemp, readdir, readFile, rm, stat, unlink, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readManifest, restore, type RestoreEvent } from '../src/batch/index.js';
import { check } from '../src/cli/commands/restore.js';
import { UsageError } from '../src/errors.js';
import { DEFAULT_VIVIDNESS } from '../src/model/decoding.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let modelDir: string;

/** A small, untrained network saved as a real model folder: colour quality plays no part in these invariants. */

/** A grey scene with shapes and a gradient: something with edges for the model to see. */
function scene(width: number, height: number, max: number): number[] {
  const v: number[] = [];
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const disc = Math.hypot(x - width * 0.35, y - height * 0.5) < height * 0.3;
      const t = (x + 2 * y) / (width + 2 * height);
      v.push(Math.round(max * (disc ? 0.2 + 0.1 * t : 0.4 + 0.55 * t)));
    }
  }
  return v;
}

async function grey8Png(path: string, w = 96, h = 64): Promise<void> {
  await sharp(Uint8Array.from(scene(w, h, 255)), { raw: { width: w, height: h, channels: 1 } })
    .toColourspace('b-w')
    .png()
    .toFile(path);
}

async function grey16Tiff(path: string, w = 80, h = 60): Promise<void> {
  await sharp(Uint16Array.from(scene(w, h, 65535)), { raw: { width: w, height: h, channels: 1 } })
    .toColourspace('grey16')
    .tiff({ compression: 'deflate' })
    .toFile(path);
}

/** A sepia-toned print: grey scene times a warm tint, RGB. */
async function tonedPng(path: string, w = 90, h = 60): Promise<void> {
  const g = scene(w, h, 255);
  const rgb = new Uint8Array(w * h * 3);
  g.forEach((v, i) => {
    rgb[i * 3] = Math.min(255, Math.round(v * 1.0 + 18));
    rgb[i * 3 + 1] = Math.round(v * 0.86 + 8);
    rgb[i * 3 + 2] = Math.round(v * 0.68);
  });
  await sharp(rgb, { raw: { width: w, height: h, channels: 3 } })
    .png()
    .toFile(path);
}

async function sha(path: string): Promise<string> {
  return createHash('sha256')
    .update(await readFile(path))
    .digest('hex');
}

/** L* per pixel by libvips' own CIELAB conversion (independent of kinhue's colour module). */
async function vipsLightness(path: string): Promise<Float32Array> {
  const { data } = await sharp(path).toColourspace('lab').raw({ depth: 'float' }).toBuffer({ resolveWithObject: true });
  const lab = new Float32Array(data.buffer, data.byteOffset, data.length / 4);
  const L = new Float32Array(lab.length / 3);
  for (let i = 0; i < L.length; i++) L[i] = lab[i * 3]!;
  return L;
}

function lightnessDiff(x: Float32Array, y: Float32Array): { mean: number; worst: number } {
  let sum = 0,
    worst = 0;
  for (let i = 0; i < x.length; i++) {
    const d = Math.abs(x[i]! - y[i]!);
    sum += d;
    worst = Math.max(worst, d);
  }
  return { mean: sum / x.length, worst };
}

async function hashTree(dir: string): Promise<Record<string, string>> {
  const out: Record<string, string> = {};
  for (const entry of await readdir(dir, { recursive: true, withFileTypes: true })) {
    if (entry.isFile()) {
      const p = join(entry.parentPath ?? (entry as unknown as { path: string }).path, entry.name);
      out[p] = await sha(p);
    }
  }
  return out;
}

function cli(args: string[]): { status: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', timeout: 120_000 });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-restore-'));
  modelDir = join(root, 'model');
  await saveUntrainedModel(modelDir);
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('restore: invariants, failures and resume', () => {
  it('keeps L*, bit depth and inputs; records bad files and goes on; resumes', async () => {
    const scans = join(root, 'scans');
    await mkdir(join(scans, 'sub'), { recursive: true });
    await grey8Png(join(scans, 'grey8.png'));
    await grey16Tiff(join(scans, 'sub', 'grey16.tif'));
    await tonedPng(join(scans, 'toned.png'));
    const good = await sharp(join(scans, 'grey8.png')).jpeg().toBuffer();
    await writeFile(join(scans, 'truncated.jpg'), good.subarray(0, Math.floor(good.length / 2)));
    await writeFile(join(scans, 'text.jpg'), 'this is not a photograph\n');
    await writeFile(join(scans, 'empty.jpg'), '');
    await grey8Png(join(scans, 'big.png'), 200, 150);
    await grey8Png(join(scans, 'vanishing.png'));
    const out = join(scans, 'restored'); // inside the input folder: must be left out of discovery
    const before = await hashTree(scans);

    const events: RestoreEvent[] = [];
    const summary = await restore({ inputs: [scans], out, model: modelDir, jobs: 2, workSize: 64, maxPixels: 20_000 }, (e) => {
      events.push(e);
      // Unreadable: the file goes away after discovery, as on a share that drops.
      if (e.type === 'plan') void unlink(join(scans, 'vanishing.png'));
    });
    expect(summary.total).toBe(8);
    expect(summary.done).toBe(3);
    const codes = Object.fromEntries(summary.failed.map((f) => [f.rel, f.code]));
    expect(codes).toEqual({
      'big.png': 'KH_TOO_LARGE',
      'empty.jpg': 'KH_EMPTY_FILE',
      'text.jpg': 'KH_NOT_AN_IMAGE',
      'truncated.jpg': 'KH_CORRUPT_IMAGE',
      'vanishing.png': 'KH_UNREADABLE',
    });
    for (const f of summary.failed) expect(f.hint, f.rel).toBeTruthy();

    // Inputs never modified (SHA-256 of every input file before and after).
    const after = await hashTree(scans);
    for (const [path, hash] of Object.entries(before)) {
      if (!path.endsWith('vanishing.png')) expect(after[path], path).toBe(hash);
    }

    // 8-bit: the result's L* equals the source's (issue 4: mean |dL*| < 0.5, worst < 2), by libvips' Lab.
    const d8 = lightnessDiff(await vipsLightness(join(scans, 'grey8.png')), await vipsLightness(join(out, 'grey8.png')));
    expect(d8.mean).toBeLessThan(0.5);
    expect(d8.worst).toBeLessThan(2);
    const dToned = lightnessDiff(await vipsLightness(join(scans, 'toned.png')), await vipsLightness(join(out, 'toned.png')));
    expect(dToned.mean).toBeLessThan(0.5);
    expect(dToned.worst).toBeLessThan(2);

    // 16-bit sources keep 16 bits, and their L* closer still than one 8-bit step allows.
    const meta16 = await sharp(join(out, 'sub', 'grey16.tif')).metadata();
    expect(meta16).toMatchObject({ depth: 'ushort', channels: 3, width: 80, height: 60 });
    const d16 = lightnessDiff(await vipsLightness(join(scans, 'sub', 'grey16.tif')), await vipsLightness(join(out, 'sub', 'grey16.tif')));
    expect(d16.mean).toBeLessThan(0.1);
    expect(d16.worst).toBeLessThan(0.5);

    // The confidence map: 8-bit grey at the result's size.
    const conf = await sharp(join(out, 'toned.confidence.png')).metadata();
    expect(conf).toMatchObject({ width: 90, height: 60, channels: 1, depth: 'uchar' });

    // The provenance record.
    const record = JSON.parse(await readFile(join(out, 'toned.kinhue.json'), 'utf8'));
    expect(record.statement).toMatch(/estimate/);
    expect(record.source.sha256).toBe(before[join(scans, 'toned.png')]);
    expect(record.source).toMatchObject({ width: 90, height: 60, bitDepth: 8, relative: 'toned.png' });
    expect(record.tone.kind).toBe('toned');
    expect(record.tone.name).toBe('sepia');
    expect(record.model.name).toBe('test-untrained');
    expect(record.model.weightsSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(record.model.topologySha256).toBe(
      createHash('sha256')
        .update(await readFile(join(modelDir, 'model.json')))
        .digest('hex'),
    );
    expect(record.settings).toMatchObject({ workSize: 64, format: 'same', decoding: 'least-ciede2000', vividness: DEFAULT_VIVIDNESS });
    expect(record.backend).toBeTruthy();
    expect(record.meanConfidence).toBeGreaterThanOrEqual(0);
    expect(record.meanConfidence).toBeLessThanOrEqual(1);
    for (const k of ['decode', 'model', 'encode', 'total']) expect(record.timings[k]).toBeGreaterThanOrEqual(0);

    // The result image's XMP names the source and says the colour is an estimate.
    const xmp = (await sharp(join(out, 'grey8.png')).metadata()).xmp?.toString('utf8') ?? '';
    expect(xmp).toMatch(/DerivedFrom/);
    expect(xmp).toMatch(/grey8\.png/);

    // Nothing of the output folder was taken as input; no temporary file is left.
    expect(events.find((e) => e.type === 'plan')).toMatchObject({ notes: [expect.stringMatching(/output folder/)] });
    const outFiles = await readdir(out, { recursive: true });
    expect(outFiles.filter((f) => String(f).endsWith('.tmp'))).toEqual([]);

    // Resume: a second run skips finished files and retries failed ones; a repaired file then succeeds.
    await writeFile(join(scans, 'truncated.jpg'), good);
    const second = await restore({ inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64, maxPixels: 20_000 });
    expect(second.total).toBe(7);
    expect(second.skipped).toBe(3);
    expect(second.done).toBe(1);
    expect(second.failed.map((f) => f.rel).sort()).toEqual(['big.png', 'empty.jpg', 'text.jpg']);
    const manifest = await readManifest(join(out, 'kinhue-run.jsonl'));
    expect(manifest.get('truncated.jpg')?.status).toBe('done');
    expect(manifest.get('text.jpg')?.status).toBe('failed');

    // Changed settings redo everything; --force does too.
    const third = await restore({
      inputs: [join(scans, 'grey8.png')],
      out: join(root, 'single'),
      model: modelDir,
      jobs: 1,
      workSize: 64,
      format: 'jpeg',
    });
    expect(third.done).toBe(1);
    expect((await sharp(join(root, 'single', 'grey8.jpg')).metadata()).format).toBe('jpeg');
  });
});

describe('restore CLI', () => {
  it('checks its command line without side effects (check is pure)', () => {
    expect(check({ inputs: ['scans/'], out: 'restored' })).toBe(true);
    expect(check({ inputs: ['a.tif'], out: 'o', jobs: 2, 'work-size': 512, temperature: 0.38, quality: 90, format: 'png' })).toBe(true);
    expect(check({ inputs: ['a'], out: 'o', decoding: 'annealed-mean', temperature: 0.5 })).toBe(true);
    expect(check({ inputs: ['a'], out: 'o', decoding: 'least-ciede2000' })).toBe(true);
    expect(check({ inputs: ['a'], out: 'o', vividness: 0 })).toBe(true);
    expect(check({ inputs: ['a'], out: 'o', decoding: 'least-ciede2000', vividness: 1 })).toBe(true);
    for (const bad of [
      { inputs: [], out: 'o' },
      { inputs: ['a'], out: '' },
      { inputs: ['a'], out: 'o', jobs: 0 },
      { inputs: ['a'], out: 'o', jobs: 1.5 },
      { inputs: ['a'], out: 'o', 'work-size': 32 },
      { inputs: ['a'], out: 'o', temperature: 0 },
      { inputs: ['a'], out: 'o', temperature: 1.5 },
      { inputs: ['a'], out: 'o', decoding: 'brightest' },
      { inputs: ['a'], out: 'o', decoding: 'least-ciede2000', temperature: 0.5 },
      { inputs: ['a'], out: 'o', quality: 101 },
      { inputs: ['a'], out: 'o', vividness: -0.1 },
      { inputs: ['a'], out: 'o', vividness: 1.5 },
      { inputs: ['a'], out: 'o', decoding: 'annealed-mean', vividness: 0.5 },
      { inputs: ['a'], out: 'o', temperature: 0.4, vividness: 0.5 },
    ]) {
      expect(() => check(bad as never), JSON.stringify(bad)).toThrow(UsageError);
      expect(() => check(bad as never)).toThrow(/Example usage: kinhue restore/);
    }
  });

  it('prints help, refuses bad command lines with exit code 2, and writes nothing on a dry run', async () => {
    const help = cli(['restore', '--help']);
    expect(help.status).toBe(0);
    expect(help.stdout).toMatch(/--work-size/);
    expect(help.stdout).toMatch(/Example|Examples/);
    expect(cli(['restore', 'x.png']).status).toBe(2);
    const badJobs = cli(['restore', 'x.png', '--out', 'o', '--jobs', '0']);
    expect(badJobs.status).toBe(2);
    expect(badJobs.stderr).toMatch(/Example usage/);
    expect(cli(['restore', 'x.png', '--out', 'o', '--format', 'gif']).status).toBe(2);
    expect(cli(['restore', join(root, 'does-not-exist'), '--out', join(root, 'o'), '--model', modelDir]).status).toBe(2);

    const scans = join(root, 'cli-scans');
    await mkdir(scans, { recursive: true });
    await grey8Png(join(scans, 'a.png'));
    const dry = cli(['restore', scans, '--out', join(root, 'cli-out'), '--model', modelDir, '--dry-run']);
    expect(dry.status).toBe(0);
    expect(dry.stdout).toMatch(/run +a\.png -> a\.png/);
    await expect(stat(join(root, 'cli-out'))).rejects.toThrow();
  });

  it('prints a JSON summary and exits 1 when a file failed', async () => {
    const scans = join(root, 'json-scans');
    await mkdir(scans, { recursive: true });
    await grey8Png(join(scans, 'a.png'));
    await writeFile(join(scans, 'b.jpg'), 'not an image');
    const r = cli([
      'restore',
      scans,
      '--out',
      join(root, 'json-out'),
      '--model',
      modelDir,
      '--work-size',
      '64',
      '--jobs',
      '1',
      '--json',
      '--verbose',
    ]);
    expect(r.status).toBe(1);
    const summary = JSON.parse(r.stdout);
    expect(summary).toMatchObject({ total: 2, done: 1, failed: [{ rel: 'b.jpg', code: 'KH_NOT_AN_IMAGE' }] });
    expect(r.stderr).toMatch(/b\.jpg/);
    // --verbose names the compute backend (tfjs-node where it is installed, else wasm), as the record does.
    const record = JSON.parse(await readFile(join(root, 'json-out', 'a.kinhue.json'), 'utf8'));
    expect(r.stderr).toContain(`backend: ${record.backend}`);
  });

  it('stops cleanly on Ctrl-C and the next run finishes the rest', async () => {
    const scans = join(root, 'sigint-scans');
    const out = join(root, 'sigint-out');
    await mkdir(scans, { recursive: true });
    for (let i = 0; i < 5; i++) await grey8Png(join(scans, `p${i}.png`), 160, 120);
    const args = [BIN, 'restore', scans, '--out', out, '--model', modelDir, '--work-size', '64', '--jobs', '1'];
    const child = spawn(process.execPath, args, { stdio: ['ignore', 'pipe', 'pipe'] });
    let stderr = '';
    const exit = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    child.stderr.on('data', (chunk: Buffer) => {
      stderr += chunk.toString();
      if (/done: /.test(stderr) && !child.killed) child.kill('SIGINT');
    });
    expect(await exit).toBe(130);
    const files = (await readdir(out)).map(String);
    expect(files.filter((f) => f.endsWith('.tmp'))).toEqual([]);
    const manifest = await readManifest(join(out, 'kinhue-run.jsonl'));
    const finished = [...manifest.values()].filter((r) => r.status === 'done').map((r) => r.output);
    expect(finished.length).toBeGreaterThanOrEqual(1);
    expect(finished.length).toBeLessThan(5);
    // Every file is complete: each finished image has its record and map; no image lacks a record.
    for (const name of files.filter((f) => /^p\d\.png$/.test(f))) {
      expect(files).toContain(name.replace('.png', '.kinhue.json'));
      expect(files).toContain(name.replace('.png', '.confidence.png'));
      await sharp(join(out, name)).stats(); // decodes completely
    }
    const again = cli(['restore', scans, '--out', out, '--model', modelDir, '--work-size', '64', '--jobs', '1', '--json']);
    expect(again.status).toBe(0);
    const summary = JSON.parse(again.stdout);
    expect(summary.skipped).toBe(finished.length);
    expect(summary.done).toBe(5 - finished.length);
  });
});

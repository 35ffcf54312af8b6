import { spawnSync } from 'node:child_process';
import { mkdir, mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readManifest, restore } from '../src/batch/index.js';
import { greyToLightness } from '../src/colour/index.js';
import { makeSheet } from '../src/report/index.js';
import { detectionFigures, drawDamage } from '../src/repair/index.js';
import { Random } from '../src/training/index.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let modelDir: string;
let scans: string;
let truth: Uint8Array;
const W = 240,
  H = 160;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-repair-'));
  modelDir = join(root, 'model');
  scans = join(root, 'scans');
  await saveUntrainedModel(modelDir);
  // A soft grey scene with seeded damage, written as an 8-bit grey PNG and a 16-bit grey TIFF.
  const L = new Float32Array(W * H);
  for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) L[y * W + x] = 40 + 25 * (x / W) + 12 * Math.sin(y / 19);
  const damaged = drawDamage(L, W, H, new Random(8), { perMegapixel: 200, grain: 1 });
  truth = damaged.mask;
  const code = (l: number, max: number): number => {
    const y = Math.min(1, Math.max(0, ((l + 16) / 116) ** 3));
    return Math.round(max * (y <= 0.0031308 ? 12.92 * y : 1.055 * y ** (1 / 2.4) - 0.055));
  };
  await mkdir(scans);
  await sharp(
    Uint8Array.from(damaged.L, (l) => code(l, 255)),
    { raw: { width: W, height: H, channels: 1 } },
  )
    .toColourspace('b-w')
    .png()
    .toFile(join(scans, 'dusty.png'));
  await sharp(
    Uint16Array.from(damaged.L, (l) => code(l, 65535)),
    { raw: { width: W, height: H, channels: 1 } },
  )
    .toColourspace('grey16')
    .tiff({ compression: 'deflate' })
    .toFile(join(scans, 'dusty16.tif'));
}, 120_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

/** The decoded samples of a picture, 16-bit when the file holds 16 bits. */
async function raw(path: string): Promise<{ data: Uint8Array | Uint16Array; channels: number; depth: number }> {
  const meta = await sharp(path).metadata();
  const wide = meta.depth === 'ushort';
  // sharp hands out sRGB unless asked to keep a grey file grey.
  let pipeline = sharp(path);
  if (meta.channels === 1) pipeline = pipeline.toColourspace(wide ? 'grey16' : 'b-w');
  const { data } = await pipeline.raw(wide ? { depth: 'ushort' } : {}).toBuffer({ resolveWithObject: true });
  const samples = wide ? new Uint16Array(data.buffer, data.byteOffset, data.length / 2) : new Uint8Array(data);
  return { data: samples, channels: meta.channels ?? 0, depth: wide ? 16 : 8 };
}

describe('restore --repair', () => {
  it("writes the mask, the repaired grey scan in the scan's depth, the record and the XMP; untouched pixels are the scan's own", async () => {
    const out = join(root, 'out');
    const summary = await restore({ inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64, repairedScan: true });
    expect(summary.done).toBe(2);
    for (const [name, ext, depth] of [
      ['dusty', '.png', 8],
      ['dusty16', '.tif', 16],
    ] as const) {
      const record = JSON.parse(await readFile(join(out, `${name}.kinhue.json`), 'utf8'));
      expect(record.settings.repair).toEqual({
        model: 'kinhue-repair',
        weightsSha256: expect.stringMatching(/^[0-9a-f]{64}$/),
        detection: expect.stringMatching(/^(network|confirmed)$/),
        threshold: expect.any(Number),
        fill: expect.stringMatching(/^(network|median)$/),
      });
      expect(record.repair.method).toContain('kinhue-repair network');
      expect(record.repair.mask).toBe(`${name}.repair.png`);
      expect(record.repair.scan).toBe(`${name}.repaired${ext}`);
      const maskFile = await raw(join(out, `${name}.repair.png`));
      expect(maskFile.channels).toBe(1);
      const mask = maskFile.data;
      const marked = Uint8Array.from(mask, (v) => (v === 255 ? 1 : 0));
      expect(mask.every((v) => v === 0 || v === 255)).toBe(true);
      expect(record.repair.pixels).toBe(marked.reduce((s, m) => s + m, 0));
      expect(record.repair.share).toBeCloseTo(record.repair.pixels / (W * H), 5);
      // The damage drawn is found: the precision goal (0.8 at 2 px) and, for recall, the 0.8 the shipped
      // model reaches on soft scenes (tests/repair-model.test.ts; the goal of 0.9 is the classical detector's there).
      const figures = detectionFigures(marked, truth, W, H, 2);
      expect(figures.recall).toBeGreaterThanOrEqual(0.8);
      expect(figures.precision).toBeGreaterThanOrEqual(0.8);
      const scan = await raw(join(scans, `${name}${ext}`));
      const repaired = await raw(join(out, `${name}.repaired${ext}`));
      expect(repaired.channels).toBe(1);
      expect(repaired.depth).toBe(depth);
      let changed = 0;
      for (let i = 0; i < W * H; i++) {
        if (!marked[i]) expect(repaired.data[i]).toBe(scan.data[i]);
        else if (repaired.data[i] !== scan.data[i]) changed++;
      }
      expect(changed).toBeGreaterThan(0.5 * record.repair.pixels);
      // The colour result is made from the repaired scan: its L* where repaired follows the repaired scan, not the damage.
      const result = await sharp(join(out, `${name}${ext}`))
        .raw()
        .toBuffer({ resolveWithObject: true });
      const resultL = greyToLightness(new Uint8Array(result.data), result.info.channels as 3);
      const repairedL = greyToLightness(depth === 16 ? (repaired.data as Uint16Array) : (repaired.data as Uint8Array), 1);
      let far = 0;
      for (let i = 0; i < W * H; i++) if (marked[i] && Math.abs(resultL[i]! - repairedL[i]!) > 2) far++;
      expect(far).toBeLessThan(0.01 * record.repair.pixels + 1);
      const xmp = (await sharp(join(out, `${name}${ext}`)).metadata()).xmp?.toString() ?? '';
      expect(xmp).toContain('<kinhue:repaired>yes</kinhue:repaired>');
      expect(xmp).toContain(`<kinhue:repairedPixels>${record.repair.pixels}</kinhue:repairedPixels>`);
    }
    const manifest = await readManifest(join(out, 'kinhue-run.jsonl'));
    expect(manifest.get('dusty.png')?.companions).toEqual(expect.arrayContaining(['dusty.repair.png', 'dusty.repaired.png']));
    // The review sheet shows the mask beside the confidence map, and a second before/after view: scan against repaired scan.
    const html = await readFile((await makeSheet({ run: out })).output, 'utf8');
    expect(html).toContain('src="dusty.repair.png"');
    expect(html).toContain('repaired (white = replaced)');
    expect(html).toContain('<span class="tag right">repaired</span>');
    expect(html).toMatch(/<tr><th>repair<\/th><td>\d+ pixels/);
  }, 300_000);

  it('without --repair writes no repair outputs and leaves the settings key as before; the CLI takes --repair', async () => {
    const plain = join(root, 'plain');
    await restore({ inputs: [join(scans, 'dusty.png')], out: plain, model: modelDir, jobs: 1, workSize: 64 });
    const record = JSON.parse(await readFile(join(plain, 'dusty.kinhue.json'), 'utf8'));
    expect(record.repair).toBeUndefined();
    expect(record.settings.repair).toBeUndefined();
    await expect(readFile(join(plain, 'dusty.repair.png'))).rejects.toThrow();
    const cli = join(root, 'cli');
    const run = spawnSync(
      process.execPath,
      [BIN, 'restore', join(scans, 'dusty.png'), '--out', cli, '--model', modelDir, '--jobs', '1', '--work-size', '64', '--repair'],
      { encoding: 'utf8' },
    );
    expect(run.status, run.stderr).toBe(0);
    const cliRecord = JSON.parse(await readFile(join(cli, 'dusty.kinhue.json'), 'utf8'));
    expect(cliRecord.repair.pixels).toBeGreaterThan(0);
    expect(cliRecord.repair.scan).toBeNull();
    await expect(readFile(join(cli, 'dusty.repaired.png'))).rejects.toThrow();
  }, 300_000);
});

// Hints and reference photos inside a restore run: used, recorded in the provenance, or ignored with a message.
import { spawnSync } from 'node:child_process';
import { mkdir, mkdtemp, readFile, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { beforeAll, describe, expect, it } from 'vitest';
import { restore } from '../src/batch/index.js';
import { srgbColourToLab } from '../src/colour/index.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';
import { hintLch, parseCssColour } from '../src/hints/index.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let modelDir: string;

/** A grey scene: a dark disc on a lighter gradient (our own test picture). */
async function scan(path: string, w = 96, h = 64): Promise<void> {
  const v = new Uint8Array(w * h);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const disc = Math.hypot(x - w * 0.35, y - h * 0.5) < h * 0.3;
      v[y * w + x] = Math.round(255 * (disc ? 0.3 : 0.55 + 0.3 * (x / w)));
    }
  }
  await sharp(v, { raw: { width: w, height: h, channels: 1 } })
    .toColourspace('b-w')
    .png()
    .toFile(path);
}

const hints = (entries: unknown[]): string =>
  JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width: 96, height: 64 }, entries });

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-hints-restore-'));
  modelDir = join(root, 'model');
  // An untrained network saved as a real model folder: the hints, not the model, give the colour here.
  await saveUntrainedModel(modelDir);
});

describe('restore with hints', () => {
  it('lists the first 20 colours it had to weaken and counts the rest (the real CLI)', async () => {
    const scans = join(root, 'many');
    await mkdir(scans);
    await scan(join(scans, 'crowded.png'));
    // 60 separate points of pure yellow (L* 97), whose chroma no part of the scene (L* about 30 to 85) can hold.
    const entries = Array.from({ length: 60 }, (_, k) => ({ x: 4 + (k % 12) * 8, y: 8 + Math.floor(k / 12) * 12, colour: '#ffff00' }));
    await writeFile(join(scans, 'crowded.hints.json'), hints(entries));
    const out = join(root, 'many-out');
    const cli = spawnSync(
      process.execPath,
      [BIN, 'restore', scans, '--out', out, '--model', modelDir, '--jobs', '1', '--work-size', '96'],
      { encoding: 'utf8', timeout: 120_000 },
    );
    expect(cli.status).toBe(0);
    const lines = cli.stderr.split('\n');
    expect(lines.filter((line) => /crowded\.png: hint entry \d+ \(/.test(line))).toHaveLength(20);
    expect(lines.filter((line) => /crowded\.png: hints: and 40 more entries whose chroma was reduced/.test(line))).toHaveLength(1);
    const record = JSON.parse(await readFile(join(out, 'crowded.kinhue.json'), 'utf8'));
    expect(record.guidance.hints.adjustments).toHaveLength(20);
    expect(record.guidance.hints.adjustmentsNotListed).toBe(40);
    expect(record.warnings).toHaveLength(21);
  });

  it('uses a hints file beside the scan, ignores a bad one with its message, and records both', async () => {
    const scans = join(root, 'scans');
    await mkdir(scans);
    await scan(join(scans, 'good.png'));
    await scan(join(scans, 'bad.png'));
    await writeFile(join(scans, 'good.hints.json'), hints([{ x: 33, y: 32, colour: '#c0504a', radius: 6, note: 'the red ball' }]));
    await writeFile(
      join(scans, 'bad.hints.json'),
      hints([
        { x: 33, y: 32, colour: '#c0504a' },
        { x: 120, y: 10, colour: '#fff' },
      ]),
    );
    const out = join(root, 'out');
    const summary = await restore({ inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64 });
    expect(summary.failed).toEqual([]);
    expect(summary.done).toBe(2);

    const good = JSON.parse(await readFile(join(out, 'good.kinhue.json'), 'utf8'));
    expect(good.guidance.hints).toMatchObject({ file: join(scans, 'good.hints.json'), used: true, entries: 1 });
    expect(good.guidance.hints.pixels).toBeGreaterThan(0);
    // The disc takes the hint's hue (the hint's colour at the disc's own L*), within 15 degrees, at its centre.
    const { data } = await sharp(join(out, 'good.png')).raw().toBuffer({ resolveWithObject: true });
    const i = (32 * 96 + 33) * 3;
    const [, a, b] = srgbColourToLab(data[i]! / 255, data[i + 1]! / 255, data[i + 2]! / 255);
    const hint = hintLch(parseCssColour('#c0504a')!);
    const dh = Math.abs(Math.atan2(b, a) - hint.hue);
    expect(Math.min(dh, 2 * Math.PI - dh)).toBeLessThan((15 * Math.PI) / 180);
    expect(Math.hypot(a, b)).toBeGreaterThan(0.5 * hint.chroma);

    const bad = JSON.parse(await readFile(join(out, 'bad.kinhue.json'), 'utf8'));
    expect(bad.guidance.hints.used).toBe(false);
    expect(bad.guidance.hints.ignored).toContain('entry 2');
    expect(bad.warnings.join('\n')).toContain('hints file not used');

    // A re-run skips both; once a hints file is edited, that scan alone is done again.
    const again = await restore({ inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64 });
    expect([again.skipped, again.done]).toEqual([2, 0]);
    await writeFile(join(scans, 'bad.hints.json'), hints([{ x: 33, y: 32, colour: '#c0504a' }]));
    const edited = await restore({ inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64 });
    expect([edited.skipped, edited.done]).toEqual([1, 1]);
    expect(edited.files.find((f) => f.rel === 'bad.png')?.status).toBe('done');

    // --no-hints: no hints file is looked for, and the settings (hence the resume key) say so.
    const plain = await restore({
      inputs: [join(scans, 'good.png')],
      out: join(root, 'plain'),
      model: modelDir,
      jobs: 1,
      workSize: 64,
      hints: false,
    });
    expect(plain.settings.hints).toBe(false);
    const record = JSON.parse(await readFile(join(root, 'plain', 'good.kinhue.json'), 'utf8'));
    expect(record.guidance).toBeUndefined();
  });

  it('refuses a grey reference before the run starts', async () => {
    const scans = join(root, 'scans2');
    await mkdir(scans);
    await scan(join(scans, 'one.png'));
    await expect(
      restore({ inputs: [scans], out: join(root, 'out2'), model: modelDir, jobs: 1, workSize: 64, reference: join(scans, 'one.png') }),
    ).rejects.toMatchObject({ code: 'KH_BAD_HINTS', message: expect.stringContaining('grey') });
  });
});

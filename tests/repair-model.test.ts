import { spawnSync } from 'node:child_process';
import { mkdtemp, readFile, rm, writeFile, copyFile, mkdir, readdir } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { initBackend } from '../src/model/index.js';
import {
  detectDamage, detectionFigures, drawDamage, loadRepairModel, maskedSquaredError, medianFill, networkPlanes, networkRepair, poolDetection,
  psnrOf, readRepairPhotos, REPAIR_META_FILE, repairPhotoSplit, trainRepairModel,
} from '../src/repair/index.js';
import { Random } from '../src/training/index.js';

const REPO = join(__dirname, '..');
const BIN = join(REPO, 'bin', 'kinhue.js');
const ORIGINALS = join(REPO, 'demo-photos', 'originals');
let root: string;

beforeAll(async () => {
  await initBackend();
  root = await mkdtemp(join(tmpdir(), 'kinhue-repair-model-'));
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('repair model folder', () => {
  it('train-repair writes a folder that loads, and a changed weights file is refused with KH_BAD_MODEL', async () => {
    const photos = join(root, 'photos');
    await mkdir(photos);
    for (const name of (await readdir(ORIGINALS)).slice(0, 6)) await copyFile(join(ORIGINALS, name), join(photos, name));
    const out = join(root, 'model');
    const result = await trainRepairModel({ photos, out, steps: 2, crop: 48, batch: 2, maxSide: 256 });
    expect(result.steps).toBe(2);
    const model = await loadRepairModel(out);
    expect(model.meta).toMatchObject({ format: 'kinhue-repair', name: 'kinhue-repair', fill: 'network', training: { steps: 2, crop: 48, batch: 2 } });
    const { mask } = networkRepair(new Float32Array(64 * 48).fill(50), 64, 48, model);
    expect(mask.length).toBe(64 * 48);
    const weights = await readFile(join(out, 'weights.bin'));
    weights[0] = weights[0]! ^ 1;
    await writeFile(join(out, 'weights.bin'), weights);
    await expect(loadRepairModel(out)).rejects.toMatchObject({ code: 'KH_BAD_MODEL' });
    const meta = JSON.parse(await readFile(join(out, REPAIR_META_FILE), 'utf8'));
    expect(meta.training.heldOut).toBe((await repairPhotoSplit(photos)).holdout.length);
  }, 300_000);

  it('the CLI checks its command line', () => {
    const run = spawnSync(process.execPath, [BIN, 'train-repair', join(root, 'nowhere'), '--out', join(root, 'm'), '--steps', '0'], { encoding: 'utf8' });
    expect(run.status).toBe(2);
    expect(run.stderr).toContain('--steps must be a whole number of 1 or more');
  });
});

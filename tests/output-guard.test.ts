// The guard that keeps every command from writing over its own inputs: path identity through
// symbolic links, hard links and spellings, and its use by hints, score, train and tune.
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { cp, link, mkdir, mkdtemp, readFile, readlink, rm, symlink } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { exitCodeFor, ExitCode } from '../src/cli/exit-codes.js';
import { ErrorCodes, UsageError } from '../src/errors.js';
import { identify, InputGuard, isWithin, OutputOnInputError } from '../src/files/index.js';
import { writeStarterHints } from '../src/hints/index.js';
import { score } from '../src/report/index.js';
import { fit } from '../src/training/index.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let photos: string;

async function sha(path: string): Promise<string> {
  return createHash('sha256')
    .update(await readFile(path))
    .digest('hex');
}

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-guard-'));
  photos = join(root, 'photos');
  await mkdir(photos);
  // Six small colour photos (a training run needs six): two-colour halves, each pair of colours its own.
  const pairs = [
    ['#c03020', '#2060c0'],
    ['#30a040', '#e0c020'],
    ['#8040a0', '#40c0c0'],
    ['#d07030', '#3050a0'],
    ['#a03060', '#60b030'],
    ['#2080a0', '#c09040'],
  ];
  for (const [i, [left, right]] of pairs.entries()) {
    const half = (colour: string) =>
      sharp({ create: { width: 24, height: 48, channels: 3, background: colour } })
        .png()
        .toBuffer();
    await sharp({ create: { width: 48, height: 48, channels: 3, background: '#000000' } })
      .composite([
        { input: await half(left!), left: 0, top: 0 },
        { input: await half(right!), left: 24, top: 0 },
      ])
      .png()
      .toFile(join(photos, `c${i}.png`));
  }
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('path identity', () => {
  it('sees one file through a symbolic link, a hard link and another spelling', async () => {
    const file = join(photos, 'c0.png');
    await symlink(file, join(root, 'soft.png'));
    await link(file, join(root, 'hard.png'));
    const guard = await InputGuard.of([file]);
    for (const alias of [join(root, 'soft.png'), join(root, 'hard.png'), join(photos, '..', 'photos', './c0.png')]) {
      await expect(guard.check(alias), alias).rejects.toBeInstanceOf(OutputOnInputError);
    }
    await expect(guard.check(join(photos, 'c0.copy.png'))).resolves.toBeUndefined();
    await expect(guard.check(join(root, 'not-yet', 'deeper', 'c0.png'))).resolves.toBeUndefined();
    expect(await isWithin(join(root, 'photos-alias-missing', 'x.png'), await identify(photos))).toBe(false);
  });

  it('a refused output stops a whole command with exit code 2, like a wrong command line', () => {
    expect(exitCodeFor(new OutputOnInputError('out/a.png', 'scans/a.png', 'choose another folder'))).toBe(ExitCode.USAGE);
    expect(new OutputOnInputError('out/a.png', 'scans/a.png', 'choose another folder').code).toBe(ErrorCodes.OUTPUT_ON_INPUT);
  });
});

describe('commands that write beside their inputs', () => {
  it('hints: never writes its starter file over the scan, through a link or a hard link', async () => {
    const scan = join(photos, 'c1.png');
    const before = await sha(scan);
    await symlink(scan, join(root, 'c1-link.json'));
    await link(scan, join(root, 'c1-hard.json'));
    for (const out of [join(root, 'c1-link.json'), join(root, 'c1-hard.json')]) {
      const error = await writeStarterHints(scan, { out, force: true }).catch((e: unknown) => e);
      expect(error, out).toBeInstanceOf(OutputOnInputError);
      expect((error as OutputOnInputError).file).toBe(out);
    }
    expect(await sha(scan)).toBe(before);
    expect(await readlink(join(root, 'c1-link.json'))).toBe(scan);
    expect((await writeStarterHints(scan, { out: join(root, 'c1.hints.json') })).path).toBe(join(root, 'c1.hints.json'));
  });

  it('score: refuses an --out folder that is the photo folder through a link, or a report file that is a photo', async () => {
    await symlink(photos, join(root, 'photos-link'));
    await expect(score({ photos: [photos], out: join(root, 'photos-link') })).rejects.toBeInstanceOf(UsageError);
    const out = join(root, 'score-out');
    await mkdir(out);
    await link(join(photos, 'c2.png'), join(out, 'kinhue-score.json'));
    await expect(score({ photos: [photos], out })).rejects.toBeInstanceOf(OutputOnInputError);
  });

  it('train and tune: refuse a model folder that is, or holds, a photo folder or the model tuned from', async () => {
    const tiny = { steps: 1, batch: 2, crop: 32, photoSize: 64, network: { width: 4 } };
    const linked = await fit({ photos: [photos], out: join(root, 'photos-link'), mode: 'train', ...tiny }).catch((e: unknown) => e);
    expect(linked).toBeInstanceOf(OutputOnInputError);
    expect((linked as OutputOnInputError).message).toMatch(/is, or holds, the input/);
    await expect(
      fit({ photos: [join(photos, 'c0.png'), join(photos, 'c1.png')], out: root, mode: 'train', ...tiny }),
    ).rejects.toBeInstanceOf(OutputOnInputError);

    const base = join(root, 'base-model');
    await saveUntrainedModel(base);
    const weightsBefore = await sha(join(base, 'weights.bin'));
    await expect(fit({ photos: [photos], out: base, from: base, mode: 'tune', ...tiny })).rejects.toBeInstanceOf(OutputOnInputError);
    expect(await sha(join(base, 'weights.bin'))).toBe(weightsBefore);

    // A file in the model folder that is a photo (a hard link) would be replaced with the folder.
    const out = join(root, 'model-out');
    await cp(base, out, { recursive: true });
    // (A folder that holds a whole model is refused before the photos are read: leave its files loose.)
    await rm(join(out, 'kinhue-model.json'));
    await rm(join(out, 'weights.bin'));
    await link(join(photos, 'c3.png'), join(out, 'weights.bin'));
    await expect(fit({ photos: [photos], out, mode: 'train', ...tiny })).rejects.toBeInstanceOf(OutputOnInputError);
  });
});

describe('KINHUE_MAX_PIXELS', () => {
  it('is refused once, at start, with a usage error when it is not a whole number of pixels', () => {
    const r = spawnSync(process.execPath, [BIN, 'restore', photos, '--out', join(root, 'never'), '--dry-run'], {
      encoding: 'utf8',
      timeout: 120_000,
      env: { ...process.env, KINHUE_MAX_PIXELS: '1e99' },
    });
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/KINHUE_MAX_PIXELS=1e99 is not a whole number of pixels/);
    expect(r.stderr.match(/KINHUE_MAX_PIXELS=1e99/g)).toHaveLength(1);
  });
});

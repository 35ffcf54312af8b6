import { spawn, spawnSync } from 'node:child_process';
import { mkdtemp, readdir, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it, vi } from 'vitest';
import { main } from '../src/cli/main.js';
import { check as checkTrain } from '../src/cli/commands/train.js';
import { check as checkTune } from '../src/cli/commands/tune.js';
import { formatDuration, Progress } from '../src/cli/progress.js';
import { UsageError } from '../src/errors.js';
import { readTrainingLog } from '../src/training/index.js';
import { writeSkyGrassPhotos } from './helpers/sky-grass-photos.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');

/** Runs the real CLI and sends `signal` once training has begun (its baseline line is printed). */
function stopped(args: string[], signal: NodeJS.Signals): Promise<{ code: number | null; stdout: string; stderr: string }> {
  return new Promise((done, fail) => {
    const child = spawn(process.execPath, [BIN, ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    let sent = false;
    child.stdout.on('data', (chunk: Buffer) => (stdout += chunk.toString()));
    child.stderr.on('data', (chunk: Buffer) => {
      stderr += chunk.toString();
      if (!sent && /at start, on the \d+ validation photos/.test(stderr)) {
        sent = true;
        child.kill(signal);
      }
    });
    // A run that ignores the signal is ended, so the test reports what it printed.
    const stuck = setTimeout(() => child.kill('SIGKILL'), 90_000);
    child.on('error', fail);
    child.on('exit', (code) => {
      clearTimeout(stuck);
      done({ code, stdout, stderr });
    });
  });
}

const ok = {
  photos: ['photos/'],
  out: 'models/mine',
  hours: 1,
  batch: 16,
  crop: 128,
  seed: 1,
  holdout: 0.1,
  resume: false,
  'eval-every': 100,
  'checkpoint-minutes': 5,
};

function usage(fn: () => unknown): UsageError {
  try {
    fn();
  } catch (error) {
    expect(error).toBeInstanceOf(UsageError);
    return error as UsageError;
  }
  throw new Error('expected a UsageError');
}

describe('train and tune command lines', () => {
  it('accept a complete command line', () => {
    expect(checkTrain(ok)).toBe(true);
    expect(checkTune({ ...ok, hours: undefined, steps: 300, 'freeze-encoder': true })).toBe(true);
  });

  it('refuse bad values with an example', () => {
    const cases: [Record<string, unknown>, RegExp][] = [
      [{ photos: [] }, /at least one photo/],
      [{ out: undefined }, /--out/],
      [{ hours: undefined, steps: undefined }, /budget/],
      [{ hours: -1 }, /--hours/],
      [{ steps: 2.5 }, /--steps/],
      [{ batch: 0 }, /--batch/],
      [{ crop: 100 }, /multiple of 16/],
      [{ holdout: 0.9 }, /--holdout/],
      [{ seed: -2 }, /--seed/],
      [{ 'learning-rate': 0 }, /--learning-rate/],
      [{ 'eval-every': 0 }, /--eval-every/],
      [{ rebalance: 1.5 }, /--rebalance/],
      [{ workers: 0 }, /--workers/],
      [{ workers: 1.5 }, /--workers/],
      [{ workers: 17 }, /--workers 17 is more than the 16 crops/],
      [{ validation: 0.7 }, /--validation must be 0 or a fraction above 0 and at most 0.5, got 0.7/],
      [{ validation: -0.1 }, /--validation must be 0 or a fraction/],
      [{ 'average-over': 1 }, /--average-over must be 0 or a whole number of at least 2/],
      [{ patience: -1 }, /--patience must be a whole number of 0 or more/],
      [{ steps: Number.NaN }, /--steps must be a whole number of at least 1, got NaN/],
    ];
    for (const [change, message] of cases) {
      const error = usage(() => checkTrain({ ...ok, ...change } as never));
      expect(error.message).toMatch(message);
      expect(error.message).toMatch(/Example usage: kinhue train /);
    }
    expect(usage(() => checkTune({ ...ok, from: ' ' } as never)).message).toMatch(/Example usage: kinhue tune /);
  });
});

describe('progress display', () => {
  it('redraws one line on a terminal and writes plain lines elsewhere', () => {
    const written: string[] = [];
    const stream = { write: (t: string) => written.push(t) > 0, isTTY: true, columns: 80 };
    const tty = new Progress({ stream });
    tty.update(0.5, 'step 5', true);
    tty.log('evaluation');
    tty.done('finished');
    expect(written[0]).toMatch(/^\r\x1b\[2K\[#{12}\.{12}\]  50%  step 5$/);
    expect(written).toContain('evaluation\n');
    expect(written.at(-1)).toBe('finished\n');

    const plain: string[] = [];
    const log = new Progress({ stream: { write: (t: string) => plain.push(t) > 0 }, tty: false, plainInterval: 3600 });
    log.update(0.25, 'step 1');
    log.update(0.5, 'step 2'); // within the interval: not written
    expect(plain).toEqual([' 25%  step 1\n']);
  });

  it('formats durations', () => {
    expect(formatDuration(42)).toBe('42s');
    expect(formatDuration(185)).toBe('3m 05s');
    expect(formatDuration(3725)).toBe('1h 02m');
  });
});

describe('kinhue train on the command line', () => {
  it('trains, refuses to overwrite the run, and resumes it', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-training-cli-'));
    const photos = await writeSkyGrassPhotos(join(dir, 'photos'));
    const out = join(dir, 'model');
    const printed: string[] = [];
    const log = vi.spyOn(console, 'log').mockImplementation((...args) => void printed.push(args.join(' ')));
    const error = vi.spyOn(console, 'error').mockImplementation(() => {});
    const stderr = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    try {
      process.exitCode = undefined;
      await main([
        'train',
        photos,
        '--out',
        out,
        '--steps',
        '2',
        '--batch',
        '2',
        '--crop',
        '32',
        '--eval-every',
        '1',
        '--keep-checkpoint',
        '--no-backbone',
        '--workers',
        '1',
      ]);
      expect(process.exitCode ?? 0).toBe(0);
      const first = printed.join('\n');
      expect(first).toMatch(/trained 2 steps \(4 crops\)/);
      // The originals' colourfulness heads the held-out table, for reading the results' against.
      expect(first).toMatch(
        /CIEDE2000  PSNR \(dB\)  colourfulness  right hue  false colour  left grey\n {2}originals {20,}\d+\.\d\n {2}grey \(L\* only\)[ \d.]+0\.0%\s+0\.0%\s+100\.0%\n/,
      );
      // The validation figures that choose the best step, both of them, and the rule.
      expect(first).toMatch(
        /validation photos: CIEDE2000 [\d.]+(, right hue [\d.]+%)? at start, best [\d.]+(, right hue [\d.]+%)? at step \d \(grey [\d.]+; chosen by CIEDE2000 less right hue \/ 6\)/,
      );
      expect(first).toMatch(/checkpoint kept \(--keep-checkpoint\)/);
      expect(first).toMatch(/model card: .*MODEL_CARD\.md, measured as restore colours on the 2 held-out photos:\n {2}model model: /);

      // Reusing the folder: the one-line reason, without the whole help before it.
      await main(['train', photos, '--out', out, '--steps', '2', '--batch', '2', '--crop', '32', '--no-backbone']);
      expect(process.exitCode).toBe(2);
      const refused = error.mock.calls.flat().join('\n');
      expect(refused).toMatch(/^kinhue: .* holds an unfinished or finished training run .*\n {2}next step: add --resume/);
      expect(refused).not.toMatch(/--checkpoint-minutes/);

      process.exitCode = undefined;
      printed.length = 0;
      await main(['train', photos, '--out', out, '--steps', '3', '--resume']);
      expect(process.exitCode ?? 0).toBe(0);
      expect((await readTrainingLog(out)).map((e) => e.step)).toEqual([1, 2, 3]);
      // Finished without --keep-checkpoint: the checkpoint goes, the model card stays.
      expect((await readdir(out)).sort()).toEqual([
        'MODEL_CARD.md',
        'kinhue-model.json',
        'model.json',
        'training-log.jsonl',
        'training-summary.json',
        'weights.bin',
      ]);

      // Resuming a finished run says so, and what to do instead; it evaluates nothing.
      error.mockClear();
      printed.length = 0;
      await main(['train', photos, '--out', out, '--steps', '3', '--resume']);
      expect(process.exitCode).toBe(2);
      expect(error.mock.calls.flat().join('\n')).toMatch(
        /has finished and its checkpoint was removed[\s\S]*next step: tune that model further with --from/,
      );
      expect(printed.join('\n')).not.toMatch(/loss 0\.000/);
      error.mockClear();
      await main(['train', photos, '--out', out, '--steps', '3']);
      expect(error.mock.calls.flat().join('\n')).toMatch(/already holds a model/);

      // A run whose checkpoint was kept, resumed within its spent budget: nothing to do, and said once.
      const kept = join(dir, 'kept');
      process.exitCode = undefined;
      await main([
        'train',
        photos,
        '--out',
        kept,
        '--steps',
        '1',
        '--batch',
        '2',
        '--crop',
        '32',
        '--keep-checkpoint',
        '--no-backbone',
        '--workers',
        '1',
      ]);
      error.mockClear();
      printed.length = 0;
      await main(['train', photos, '--out', kept, '--steps', '1', '--resume']);
      expect(process.exitCode).toBe(2);
      expect(error.mock.calls.flat().join('\n')).toMatch(
        /already reached its budget \(--steps 1\) at step 1; nothing to do\n {2}next step: give a larger --steps or --hours/,
      );
      expect(printed.join('\n')).not.toMatch(/loss 0\.000/);
    } finally {
      log.mockRestore();
      error.mockRestore();
      stderr.mockRestore();
      process.exitCode = undefined;
      await rm(dir, { recursive: true, force: true });
    }
  }, 300_000);
});

describe('stopping train and tune', () => {
  // A step budget far beyond what the test waits for: only the signal ends these runs.
  const small = ['--steps', '100000', '--batch', '2', '--crop', '32', '--eval-every', '100000'];

  it.each([
    ['tune', 'SIGINT'],
    ['train', 'SIGTERM'],
    ['train', 'SIGHUP'],
  ] as const)('%s stopped by %s writes a checkpoint and a model, and exits 130', async (verb, signal) => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-training-stop-'));
    try {
      await writeSkyGrassPhotos(join(dir, 'photos'));
      const out = join(dir, 'model');
      const run = await stopped([verb, join(dir, 'photos'), '--out', out, ...small], signal);
      expect(run.stderr).toMatch(/stopping after this step/);
      expect(run.stdout).toMatch(/interrupted; continue with --resume/);
      expect(run.code).toBe(130);
      expect((await readdir(out)).sort()).toEqual(
        expect.arrayContaining(['kinhue-model.json', 'model.json', 'training-checkpoint.bin', 'weights.bin']),
      );
    } finally {
      await rm(dir, { recursive: true, force: true });
    }
  });

  it('print the code of unusable data, as other errors do', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-training-empty-'));
    try {
      for (const verb of ['train', 'tune']) {
        const run = spawnSync(process.execPath, [BIN, verb, dir, '--out', join(dir, 'model'), '--steps', '2'], {
          encoding: 'utf8',
          timeout: 120_000,
        });
        expect(run.status).toBe(1);
        expect(run.stderr).toMatch(new RegExp(`kinhue: KH_BAD_DATA ${dir.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: `));
        expect(run.stderr).toMatch(/next step: /);
      }
    } finally {
      await rm(dir, { recursive: true, force: true });
    }
  });
});

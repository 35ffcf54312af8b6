import { describe, expect, it } from 'vitest';
import { check as checkTrain } from '../src/cli/commands/train.js';
import { check as checkTune } from '../src/cli/commands/tune.js';
import { formatDuration, Progress } from '../src/cli/progress.js';
import { UsageError } from '../src/errors.js';

const ok = { photos: ['photos/'], out: 'models/mine', hours: 1, batch: 16, crop: 128, seed: 1, holdout: 0.1, resume: false, 'eval-every': 100, 'checkpoint-minutes': 5 };

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

// One restore split into parts sharing an output folder: the partition, the schedulers' environments,
// runs of every part into one folder (each scan once; resume, dry run, sheet and progress read them all),
// and what a part leaves alone: another machine's temporary files and another part's manifest.
// Real files and processes; an untrained model, since colour plays no part in who writes what.
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdir, mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import {
  loadRunFolder,
  parsePart,
  partFromScheduler,
  partKey,
  partOf,
  planOutputs,
  restore,
  runProgress,
  type RestoreSummary,
  type RunProgress,
} from '../src/batch/index.js';
import { check } from '../src/cli/commands/restore.js';
import { main } from '../src/cli/main.js';
import { readRun } from '../src/report/index.js';
import { UsageError } from '../src/errors.js';
import { hostLabel } from '../src/files/index.js';
import { greyPng } from './helpers/grey-png.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
let root: string;
let modelDir: string;

/** A folder of `n` small scans, a few in a sub-folder. */
async function album(name: string, n: number): Promise<string> {
  const dir = join(root, name);
  await mkdir(join(dir, 'box-2'), { recursive: true });
  for (let i = 0; i < n; i++) await greyPng(join(dir, i % 3 === 2 ? 'box-2' : '', `scan-${String(i).padStart(2, '0')}.png`), 64, 48, i);
  return dir;
}

const run = (inputs: string[], out: string, more: Partial<Parameters<typeof restore>[0]> = {}): Promise<RestoreSummary> =>
  restore({ inputs, out, model: modelDir, jobs: 1, workSize: 64, ...more });

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-parts-'));
  modelDir = join(root, 'model');
  await saveUntrainedModel(modelDir);
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('the partition', () => {
  const names = Array.from({ length: 600 }, (_, i) => `box-${i % 7}/scan ${i}.tif`);

  it('puts every scan in one part of 1 to N, spread evenly, and keeps it there when scans are added', () => {
    for (const count of [1, 3, 10]) {
      const parts = names.map((n) => partOf(n, count));
      expect(parts.every((p) => Number.isInteger(p) && p >= 1 && p <= count)).toBe(true);
      const sizes = Array.from({ length: count }, (_, k) => parts.filter((p) => p === k + 1).length);
      // 600 / count each; a uniform hash keeps every part within 35% of that here (common practice: a few standard deviations).
      for (const size of sizes) expect(Math.abs(size - 600 / count)).toBeLessThanOrEqual(0.35 * (600 / count));
    }
    const before = planOutputs(
      names.map((rel) => ({ path: `/s/${rel}`, rel })),
      'same',
    );
    const added = [...names, ...Array.from({ length: 200 }, (_, i) => `box-9/new ${i}.tif`)].sort();
    const after = new Map(
      planOutputs(
        added.map((rel) => ({ path: `/s/${rel}`, rel })),
        'same',
      ).map((o, i) => [added[i], o.image]),
    );
    names.forEach((rel, i) => expect(partOf(after.get(rel)!, 10)).toBe(partOf(before[i]!.image, 10)));
  });

  it('never gives one output file to two parts, even when the parts found different scans', () => {
    // Scans whose outputs can meet: the same stem in two formats, letter case, a name that is another's
    // name with its extension, a scan named like another's confidence map, and numbered clashes.
    const tricky = [
      'x.jpg',
      'x.png',
      'X_jpg.tif',
      'x.confidence.png',
      'x.confidence.confidence.png',
      'x-2.jpg',
      'Sub/A.png',
      'sub/a.jpg',
      'x_jpg-2.jpg',
    ];
    const naive = (rel: string, count: number): number =>
      (Number.parseInt(createHash('sha256').update(rel).digest('hex').slice(0, 12), 16) % count) + 1;
    const shared = (partOfFile: (rel: string, image: string, count: number) => number): string[] => {
      const clashes: string[] = [];
      for (const count of [2, 3, 5]) {
        const writer = new Map<string, number>(); // output file (lower case: some file systems ignore case) -> part
        for (let mask = 1; mask < 1 << tricky.length; mask++) {
          const view = tricky
            .filter((_, i) => mask & (1 << i))
            .sort()
            .map((rel) => ({ path: `/s/${rel}`, rel }));
          planOutputs(view, 'same').forEach((o, i) => {
            const part = partOfFile(view[i]!.rel, o.image, count);
            for (const file of [o.image, o.confidence, o.record].map((f) => f.toLowerCase())) {
              const seen = writer.get(file);
              if (seen !== undefined && seen !== part) clashes.push(`${file}: parts ${seen} and ${part} of ${count}`);
              writer.set(file, part);
            }
          });
        }
      }
      return clashes;
    };
    expect(shared((_, image, count) => partOf(image, count))).toEqual([]);
    // A partition by each scan's relative path alone would let two parts write one file.
    expect(shared((rel, _, count) => naive(rel, count)).length).toBeGreaterThan(0);
    expect(partKey('Sub/X.confidence.confidence.png')).toBe('sub/x');
  });

  it('reads K/N and the part a Slurm array task or a Kubernetes pod is', () => {
    expect(parsePart('2/3')).toEqual({ index: 2, count: 3 });
    for (const bad of ['0/3', '4/3', '2', 'a/b', '1/0', '1/10001']) expect(() => parsePart(bad), bad).toThrow(UsageError);
    expect(partFromScheduler('slurm', { SLURM_ARRAY_TASK_ID: '2', SLURM_ARRAY_TASK_COUNT: '3' })).toEqual({ index: 2, count: 3 });
    expect(partFromScheduler('slurm', { SLURM_ARRAY_TASK_ID: '2', SLURM_ARRAY_TASK_COUNT: '1' }, 3)).toEqual({ index: 2, count: 3 });
    expect(partFromScheduler('kubernetes', { JOB_COMPLETION_INDEX: '0' }, 10)).toEqual({ index: 1, count: 10 });
    expect(partFromScheduler('kubernetes', { JOB_COMPLETION_INDEX: '9' }, 10)).toEqual({ index: 10, count: 10 });
    const refused = (f: () => unknown): UsageError => {
      try {
        f();
      } catch (error) {
        return error as UsageError;
      }
      throw new Error('not refused');
    };
    expect(refused(() => partFromScheduler('slurm', {})).message).toMatch(/SLURM_ARRAY_TASK_ID is not set/);
    expect(refused(() => partFromScheduler('slurm', { SLURM_ARRAY_TASK_ID: '0', SLURM_ARRAY_TASK_COUNT: '3' })).hint).toMatch(
      /--array=1-N/,
    );
    expect(refused(() => partFromScheduler('slurm', { SLURM_ARRAY_TASK_ID: '2', SLURM_ARRAY_TASK_COUNT: '1' })).hint).toMatch(
      /--part-count/,
    );
    expect(refused(() => partFromScheduler('kubernetes', { JOB_COMPLETION_INDEX: '0' })).hint).toMatch(/--part-count N/);
    expect(refused(() => partFromScheduler('kubernetes', { JOB_COMPLETION_INDEX: '10' }, 10)).message).toMatch(/from 1 to 10, got 11/);
    const base = { inputs: ['scans/'], out: 'restored/' };
    expect(check({ ...base, part: '1/3' })).toBe(true);
    expect(check({ ...base, 'part-from': 'kubernetes', 'part-count': 4 })).toBe(true);
    expect(() => check({ ...base, part: '1/3', 'part-from': 'slurm' })).toThrow(/not both/);
    expect(() => check({ ...base, part: '0/3' })).toThrow(/from 1 to 3/);
    expect(() => check({ ...base, 'part-count': 3 })).toThrow(/goes with --part-from/);
  });
});

describe('parts in one output folder', () => {
  it('restores each scan once over three parts; resume, a dry run, the sheet and progress read every part', async () => {
    const scans = await album('album', 12);
    const out = join(root, 'album-out');
    const summaries: RestoreSummary[] = [];
    for (const index of [1, 2, 3]) summaries.push(await run([scans], out, { part: { index, count: 3 } }));
    expect(summaries.map((s) => s.failed)).toEqual([[], [], []]);
    expect(summaries.map((s) => s.found)).toEqual([12, 12, 12]);
    expect(summaries.reduce((a, s) => a + s.done, 0)).toBe(12);
    const written = summaries.flatMap((s) => s.files.map((f) => f.outputs.image)).sort();
    expect(new Set(written).size).toBe(12);

    const folder = await loadRunFolder(out);
    expect(folder.manifests.map((m) => m.name)).toEqual([1, 2, 3].map((k) => `kinhue-run.part-${k}-of-3.${hostLabel()}.jsonl`));
    for (const m of folder.manifests) for (const r of m.contents.history) expect(partOf(r.output, 3)).toBe(m.part!.index);
    expect([...folder.records.keys()].sort()).toEqual(written);

    // Resume: every part finds its scans finished; a run of all scans (dry) too.
    for (const index of [1, 2, 3]) expect((await run([scans], out, { part: { index, count: 3 } })).done).toBe(0);
    const plan = await run([scans], out, { dryRun: true });
    expect(plan.files.map((f) => f.action)).toEqual(Array(12).fill('skip'));

    const sheet = await readRun(out, out);
    expect(sheet.photos.filter((p) => p.status === 'done')).toHaveLength(12);
    const progress = runProgress(folder);
    expect(progress.split).toBe(3);
    expect(progress.total).toMatchObject({ files: 12, done: 12, failed: 0, pending: 0, secondsLeft: 0 });
    expect(progress.parts.map((p) => p.files)).toEqual(summaries.map((s) => s.files.length));

    // Another split into the same folder would share outputs with these parts.
    await expect(run([scans], out, { part: { index: 1, count: 4 } })).rejects.toThrow(/split into 3 parts/);
  });

  it("runs the README's Kubernetes Job command for each completion index into one folder", async () => {
    const readme = await readFile(join(__dirname, '..', 'README.md'), 'utf8');
    const job = /```yaml\n([\s\S]*?)```/.exec(readme)![1]!;
    const completions = Number(/completions: (\d+)/.exec(job)![1]);
    const command = JSON.parse(`[${/command: \[([^\]]*)\]/.exec(job)![1]}]`) as string[];
    expect(command.slice(0, 3)).toEqual(['node', 'bin/kinhue.js', 'restore']);
    const scans = await album('pod-album', 10);
    const out = join(root, 'pod-out');
    // The archive's paths become this test's; one core and the small model instead of 16 and the shipped one.
    const args = command
      .slice(2)
      .map((a, i, all) => (a === '/archive/scans' ? scans : a === '/archive/restored' ? out : all[i - 1] === '--jobs' ? '1' : a));
    const written: string[] = [];
    const quiet = [
      vi.spyOn(process.stderr, 'write').mockImplementation(() => true),
      vi.spyOn(console, 'log').mockImplementation((t: string) => void written.push(t)),
    ];
    try {
      for (let index = 0; index < completions; index++) {
        process.env.JOB_COMPLETION_INDEX = String(index);
        process.exitCode = undefined;
        await main([...args, '--model', modelDir, '--work-size', '64']);
        expect(process.exitCode, written.join('\n')).toBe(0);
      }
    } finally {
      delete process.env.JOB_COMPLETION_INDEX;
      process.exitCode = undefined;
      for (const spy of quiet) spy.mockRestore();
    }
    const folder = await loadRunFolder(out);
    expect(folder.manifests.map((m) => m.part!.index).sort((x, y) => x - y)).toEqual(Array.from({ length: completions }, (_, k) => k + 1));
    const done = folder.manifests.flatMap((m) => m.contents.history.filter((r) => r.status === 'done').map((r) => r.output));
    expect(done).toHaveLength(10);
    expect(new Set(done).size).toBe(10);
    expect(runProgress(folder).total).toMatchObject({ files: 10, done: 10, pending: 0 });
  });

  it("keeps another machine's temporary files and another part's unfinished manifest line; clears its own leftovers", async () => {
    const scans = await album('shared', 8);
    const out = join(root, 'shared-out');
    await mkdir(out);
    const outputs = (await run([scans], out, { dryRun: true })).files.map((f) => f.outputs.image).filter((o) => !o.includes('/'));
    const mine = outputs.find((o) => partOf(o, 2) === 1)!;
    const theirs = outputs.find((o) => partOf(o, 2) === 2)!;
    expect([mine, theirs].every(Boolean)).toBe(true);
    const ended = spawnSync(process.execPath, ['-e', '0']).pid!; // a real process that has ended
    const here = hostLabel();
    const otherHost = `${here}-other`;
    const temps = {
      // Part 2 at work on another machine: its process id means nothing here.
      theirsAtWork: `${theirs}.${ended}@${otherHost}.0123abcd.tmp`,
      // An earlier try of part 1 on another machine: no other part writes this output.
      mineElsewhere: `${mine}.${process.pid}@${otherHost}.4567cdef.tmp`,
      // A process of this machine that has ended, and one that runs.
      endedHere: `notes.txt.${ended}@${here}.89abcdef.tmp`,
      runningHere: `notes.txt.${process.pid}@${here}.01234567.tmp`,
    };
    for (const name of Object.values(temps)) await writeFile(join(out, name), 'partial');
    // Part 2's manifest on the other machine, its last line being written; part 1's own, cut short by a kill.
    const theirManifest = join(out, `kinhue-run.part-2-of-2.${otherHost}.jsonl`);
    const line = { time: new Date().toISOString(), status: 'done', source: join(scans, theirs), output: theirs, settings: 'k' };
    await writeFile(theirManifest, `${JSON.stringify(line)}\n{"time":"2030-01-01T00:00:00.000Z","status":"do`);
    const ownManifest = join(out, `kinhue-run.part-1-of-2.${here}.jsonl`);
    await writeFile(ownManifest, '{"time":"2024-01-01T00:00:00.000Z","status":"done","source":"/x.png","outp');
    const theirBytes = await readFile(theirManifest, 'utf8');

    const summary = await run([scans], out, { part: { index: 1, count: 2 } });
    expect(summary.failed).toEqual([]);
    expect(summary.done).toBeGreaterThan(0);
    const left = (await readdir(out)).filter((n) => n.endsWith('.tmp')).sort();
    expect(left).toEqual([temps.runningHere, temps.theirsAtWork].sort());
    expect(summary.notes).toContain('removed 2 temporary files left by an earlier run that was stopped');
    expect(summary.notes.filter((n) => n.includes('cut short'))).toEqual([
      expect.stringMatching(/^kinhue-run\.part-1-of-2\..* line 1 was cut short/),
    ]);
    expect(await readFile(theirManifest, 'utf8')).toBe(theirBytes);
    expect((await readFile(ownManifest, 'utf8')).split('\n')[1]).toMatch(/^\{"time":/); // the next line starts on its own
  });

  it('says what is pending, the rate and the time left of a part stopped part-way, and of parts not started', async () => {
    const scans = await album('stopped', 9);
    const out = join(root, 'stopped-out');
    const count = 2;
    const files = (await run([scans], out, { dryRun: true })).files.map((f) => f.outputs.image);
    const index = [1, 2].find((k) => files.filter((o) => partOf(o, count) === k).length >= 3)!;
    const size = files.filter((o) => partOf(o, count) === index).length;
    // Stopped after its first scan: the next one never starts.
    const soft = new AbortController();
    const partWay = await restore(
      { inputs: [scans], out, model: modelDir, jobs: 1, workSize: 64, part: { index, count }, signal: soft.signal },
      (e) => e.type === 'done' && soft.abort(),
    );
    expect(partWay.done).toBe(1);
    expect(partWay.interrupted).toBe(true);
    const cli = spawnSync(process.execPath, [BIN, 'progress', out, '--json'], { encoding: 'utf8' });
    expect(cli.status, cli.stderr).toBe(0);
    const p = JSON.parse(cli.stdout) as RunProgress;
    const row = p.parts[index - 1]!;
    expect(row).toMatchObject({ files: size, done: 1, failed: 0, pending: size - 1, host: hostLabel() });
    expect(row.perMinute).toBeGreaterThan(0);
    expect(row.secondsLeft).toBeCloseTo(((size - 1) * 60) / row.perMinute!, 6);
    const other = p.parts[2 - index]!;
    expect(other).toMatchObject({ started: null, files: null, pending: null, perMinute: null });
    // Not every part started: the total counts every scan found.
    expect(p.total).toMatchObject({ files: 9, done: 1, pending: 8 });
    const table = spawnSync(process.execPath, [BIN, 'progress', out], { encoding: 'utf8' });
    expect(table.stdout).toMatch(/not started/);
    expect(table.stdout).toMatch(new RegExp(`${index}/2\\s+${size}\\s+1\\s+0\\s+${size - 1}\\s`));
    expect(table.stdout).toMatch(/1 part has not started/);
  });
});

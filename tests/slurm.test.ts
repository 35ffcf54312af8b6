// A real scheduler: a single-node Slurm from Debian's packages runs the README's array script over the
// demo album (3 tasks into one folder), then a second run with one task cancelled part-way and resubmitted.
// An untrained model keeps it fast: which colours come out plays no part in who writes what.
import { spawnSync } from 'node:child_process';
import { mkdtemp, readdir, readFile, rm, stat, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadRunFolder, partOf, planOutputs, type RunProgress } from '../src/batch/index.js';
import { discoverInputs, hostLabel } from '../src/files/index.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';
import { slurmMissing, startSlurm, type SingleNodeSlurm } from './helpers/single-node-slurm.js';

const REPO = join(__dirname, '..');
const BIN = join(REPO, 'bin', 'kinhue.js');
const SCANS = join(REPO, 'demo-photos', 'scans');
const PARTS = 3;
const skipReason = slurmMissing();

let root: string;
let slurm: SingleNodeSlurm | undefined;
let script: string;
let modelDir: string;

const sleep = (ms: number): Promise<void> => new Promise((resolve) => setTimeout(resolve, ms));

/** The README's Slurm array script, as printed there. */
async function readmeScript(): Promise<string> {
  const readme = await readFile(join(REPO, 'README.md'), 'utf8');
  const block = [...readme.matchAll(/```sh\n([\s\S]*?)```/g)].map((m) => m[1]!).find((b) => b.includes('#SBATCH --array'));
  if (!block) throw new Error('README.md has no sh block with #SBATCH --array');
  return block;
}

/** Submits the README's script as `sbatch` would be run by hand; returns the job id. */
function submit(out: string, log: string, sbatchOptions: string[], scriptArgs: string[] = []): string {
  return slurm!
    .command('sbatch', [
      '--parsable',
      '--cpus-per-task=1',
      '--mem=500M',
      `--chdir=${REPO}`,
      `--output=${join(root, log)}-%A_%a.log`,
      `--export=ALL,SCANS=${SCANS},RESTORED=${out}`,
      ...sbatchOptions,
      script,
      '--model',
      modelDir,
      '--work-size',
      '64',
      ...scriptArgs,
    ])
    .trim();
}

/** Waits until the job has left the queue (every task finished, failed or cancelled). */
async function finished(job: string, seconds = 150): Promise<void> {
  for (let waited = 0; waited < seconds * 1000; waited += 250) {
    const r = spawnSync('squeue', ['-h', '-j', job, '-o', '%i'], { env: slurm!.env, encoding: 'utf8' });
    if (r.status !== 0 || r.stdout.trim() === '') return;
    await sleep(250);
  }
  throw new Error(`job ${job} still queued after ${seconds} s\n${await slurm!.logs()}`);
}

/** Each array task's state and exit code, by task id, from the controller. */
function taskStates(job: string): Map<number, string> {
  const lines = slurm!.command('scontrol', ['-o', 'show', 'job', job]).trim().split('\n');
  return new Map(
    lines.map((l) => [Number(/ArrayTaskId=(\d+)/.exec(l)?.[1]), `${/JobState=(\S+)/.exec(l)?.[1]} ${/ExitCode=(\S+)/.exec(l)?.[1]}`]),
  );
}

function kinhue(args: string[]): { status: number | null; stdout: string; stderr: string } {
  return spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', timeout: 60_000 });
}

/** Output name -> number of 'done' lines over every manifest of the folder. */
async function doneLines(out: string): Promise<Map<string, number>> {
  const run = await loadRunFolder(out);
  const counts = new Map<string, number>();
  for (const m of run.manifests)
    for (const r of m.contents.history) if (r.status === 'done') counts.set(r.output, (counts.get(r.output) ?? 0) + 1);
  return counts;
}

beforeAll(async () => {
  if (skipReason) return;
  root = await mkdtemp(join(tmpdir(), 'kinhue-slurm-'));
  modelDir = join(root, 'model');
  await saveUntrainedModel(modelDir);
  script = join(root, 'restore-archive.sbatch');
  await writeFile(script, await readmeScript(), { mode: 0o755 });
  slurm = await startSlurm(join(root, 'slurm'));
});

afterAll(async () => {
  await slurm?.stop();
  if (root) await rm(root, { recursive: true, force: true });
});

describe.skipIf(Boolean(skipReason))(
  `the README's Slurm array script on a single-node Slurm${skipReason ? ` (skipped: ${skipReason})` : ''}`,
  () => {
    it('restores every scan exactly once in 3 tasks; a task cancelled part-way and resubmitted does only what was left', async () => {
      const discovery = await discoverInputs([SCANS], { example: '' });
      const outputs = planOutputs(discovery.files, 'same').map((o) => o.image);
      // Every scan of the demo album (its images; the hints file is not one).
      expect(outputs).toHaveLength((await readdir(SCANS)).filter((f) => /\.(jpe?g|tiff?)$/i.test(f)).length);
      const album = outputs.length;

      // First run: 3 tasks, one part each, into one folder.
      const out = join(root, 'restored');
      const job = submit(out, 'first', ['--array=1-3']);
      await finished(job);
      expect([...taskStates(job).entries()].sort(), await slurm!.logs()).toEqual([
        [1, 'COMPLETED 0:0'],
        [2, 'COMPLETED 0:0'],
        [3, 'COMPLETED 0:0'],
      ]);
      const run = await loadRunFolder(out);
      expect(run.notes).toEqual([]);
      expect(run.manifests.map((m) => m.name)).toEqual([1, 2, 3].map((k) => `kinhue-run.part-${k}-of-3.${hostLabel()}.jsonl`));
      for (const m of run.manifests) {
        for (const r of m.contents.history) expect(partOf(r.output, PARTS), `${r.output} in ${m.name}`).toBe(m.part!.index);
      }
      expect(Object.fromEntries(await doneLines(out))).toEqual(Object.fromEntries(outputs.map((o) => [o, 1])));
      for (const o of outputs) expect((await stat(join(out, o))).size).toBeGreaterThan(0);
      const progress = kinhue(['progress', out, '--json']);
      expect(progress.status, progress.stderr).toBe(0);
      const figures = JSON.parse(progress.stdout) as RunProgress;
      expect(figures.split).toBe(PARTS);
      expect(figures.total).toMatchObject({ files: album, done: album, failed: 0, pending: 0 });
      const sheet = kinhue(['sheet', out]);
      expect(sheet.status, sheet.stderr).toBe(0);
      expect(sheet.stdout).toContain(`(${album} restored)`);

      // Second run: cancel the part with the most scans once it has finished one.
      const sizes = [1, 2, 3].map((k) => outputs.filter((o) => partOf(o, PARTS) === k).length);
      const k = sizes.indexOf(Math.max(...sizes)) + 1;
      expect(sizes[k - 1]).toBeGreaterThanOrEqual(2);
      const again = join(root, 'restored-again');
      const second = submit(again, 'second', ['--array=1-3']);
      const partManifest = `kinhue-run.part-${k}-of-3.${hostLabel()}.jsonl`;
      for (let waited = 0; ; waited += 100) {
        const done =
          (await loadRunFolder(again)).manifests.find((m) => m.name === partManifest)?.contents.history.filter((r) => r.status === 'done')
            .length ?? 0;
        if (done >= 1) break;
        if (waited > 120_000) throw new Error(`part ${k} finished no scan in 120 s\n${await slurm!.logs()}`);
        await sleep(100);
      }
      slurm!.command('scancel', [`${second}_${k}`]);
      await finished(second);
      expect(taskStates(second).get(k)).toMatch(/^CANCELLED/);
      const stopped = JSON.parse(kinhue(['progress', again, '--json']).stdout) as RunProgress;
      const left = stopped.parts[k - 1]!.pending!;
      expect(left, `part ${k} finished all its scans before the cancel landed`).toBeGreaterThan(0);
      expect(left).toBeLessThan(sizes[k - 1]!);
      expect(stopped.total.pending).toBe(left);
      const log = await readFile(join(root, (await readdir(root)).find((n) => n.startsWith(`second-${second}_${k}.`))!), 'utf8');
      expect(log).toMatch(/stopping: no new file starts/);

      // Resubmitted alone, as the README says: only what the part had left.
      const resubmitted = submit(again, 'resubmitted', [`--array=${k}`], ['--part-count', String(PARTS)]);
      await finished(resubmitted);
      expect(taskStates(resubmitted).get(k), await slurm!.logs()).toBe('COMPLETED 0:0');
      const starts = (await loadRunFolder(again)).manifests.find((m) => m.name === partManifest)!.contents.starts;
      expect(starts.map((s) => s.start.toRun)).toEqual([sizes[k - 1], left]);
      expect(Object.fromEntries(await doneLines(again))).toEqual(Object.fromEntries(outputs.map((o) => [o, 1])));
      const finalFigures = JSON.parse(kinhue(['progress', again, '--json']).stdout) as RunProgress;
      expect(finalFigures.total).toMatchObject({ files: album, done: album, failed: 0, pending: 0 });
      expect(kinhue(['sheet', again]).stdout).toContain(`(${album} restored)`);
    }, 420_000); // the tasks share the cores with other suites in `npm test`
  },
);

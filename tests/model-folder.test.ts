// A model folder is checked and written whole: the layout file (model.json) is hashed beside the weights,
// a save killed at any moment leaves a folder that loads, and leftovers of dead processes are cleaned up.
// Real folders, a real child process killed with SIGKILL, and the real CLI.
import { spawn, spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { cp, mkdir, mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readModelInfo, restore } from '../src/batch/index.js';
import { ErrorCodes, ModelError } from '../src/errors.js';
import { hostLabel } from '../src/files/temp-name.js';
import { DEFAULT_MODEL_DIR, initBackend, loadModel, tidyModelFolder } from '../src/model/index.js';
import { random } from './helpers/random.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

const REPO = join(__dirname, '..');
const BIN = join(REPO, 'bin', 'kinhue.js');
const SAVE_LOOP = join(__dirname, 'helpers', 'save-loop.mjs');
const SCAN = join(REPO, 'demo-photos', 'scans', 'wrenfold-03-new-calf.jpg');
const MODEL_FILES = ['kinhue-model.json', 'model.json', 'weights.bin'];

let root: string;

beforeAll(async () => {
  await initBackend();
  root = await mkdtemp(join(tmpdir(), 'kinhue-model-folder-'));
});
afterAll(async () => {
  if (root) await rm(root, { recursive: true, force: true });
});

const sha256 = (data: Buffer): string => createHash('sha256').update(data).digest('hex');

async function refusal(promise: Promise<unknown>): Promise<ModelError> {
  const error = await promise.then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(error).toBeInstanceOf(ModelError);
  return error as ModelError;
}

/** The pid of a process that has ended. */
function deadPid(): number {
  const child = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
  return Number(child.stdout);
}

async function metadata(dir: string): Promise<Record<string, unknown>> {
  return JSON.parse(await readFile(join(dir, 'kinhue-model.json'), 'utf8')) as Record<string, unknown>;
}

describe('the layout file is checked', () => {
  it('the shipped model records the SHA-256 of its model.json, and its weights are the ones its card names', async () => {
    const model = await loadModel(DEFAULT_MODEL_DIR);
    model.network.dispose();
    expect(model.meta.topologySha256).toBe(sha256(await readFile(join(DEFAULT_MODEL_DIR, 'model.json'))));
    expect(model.topologySha256).toBe(model.meta.topologySha256);
    expect(model.warnings).toEqual([]);
    // Reference: the weights hash written in the model card when the model was trained.
    const card = await readFile(join(DEFAULT_MODEL_DIR, 'MODEL_CARD.md'), 'utf8');
    const named = /`weights\.bin` with SHA-256 ([0-9a-f]{64})/.exec(card)?.[1];
    expect(named).toBeDefined();
    expect(sha256(await readFile(join(DEFAULT_MODEL_DIR, 'weights.bin')))).toBe(named);
  });

  it('refuses a model whose model.json was edited (relu made linear), naming the file and the next step', async () => {
    const dir = join(root, 'edited');
    await cp(DEFAULT_MODEL_DIR, dir, { recursive: true });
    const layout = await readFile(join(dir, 'model.json'), 'utf8');
    expect(layout).toContain('"activation":"relu"');
    await writeFile(join(dir, 'model.json'), layout.replace('"activation":"relu"', '"activation":"linear"'));

    for (const error of [await refusal(loadModel(dir)), await refusal(readModelInfo(dir))]) {
      expect(error.code).toBe(ErrorCodes.BAD_MODEL);
      expect(error.file).toBe(join(dir, 'model.json'));
      expect(error.message).toMatch(/model\.json does not match the SHA-256 in kinhue-model\.json/);
      expect(error.hint).toMatch(/train or tune it again/);
    }
    const out = join(root, 'edited-out');
    const cli = spawnSync(process.execPath, [BIN, 'restore', SCAN, '--out', out, '--model', dir, '--jobs', '1'], {
      encoding: 'utf8',
      timeout: 120_000,
    });
    expect(cli.status).toBe(1);
    expect(cli.stderr).toContain(`KH_BAD_MODEL`);
    expect(cli.stderr).toContain(join(dir, 'model.json'));
    expect(cli.stderr).toContain('next step:');
    expect(await readdir(out).catch(() => 'absent')).toBe('absent');
  });

  it('saves the layout hash, and uses a folder from before it with a warning', async () => {
    const dir = join(root, 'older');
    await saveUntrainedModel(dir, 'older');
    const meta = await metadata(dir);
    expect(meta.topologySha256).toBe(sha256(await readFile(join(dir, 'model.json'))));

    delete meta.topologySha256;
    await writeFile(join(dir, 'kinhue-model.json'), JSON.stringify(meta));
    const model = await loadModel(dir);
    model.network.dispose();
    expect(model.warnings).toEqual([expect.stringMatching(/predates the model\.json hash.*not checked/)]);
    const plan = await restore({ inputs: [SCAN], out: join(root, 'older-out'), model: dir, dryRun: true });
    expect(plan.notes).toContain(model.warnings[0]);
    expect(plan.model.topologySha256).toBe(sha256(await readFile(join(dir, 'model.json'))));
  });
});

describe('the model folder is written as one unit', () => {
  it('a save killed at any moment leaves a folder that loads, old or new but never mixed', async () => {
    const dir = join(root, 'killed');
    await mkdir(dir);
    const others = { 'MODEL_CARD.md': '# card\n', 'training-log.jsonl': '{"step":1}\n', 'training-checkpoint.bin': 'checkpoint' };
    for (const [name, text] of Object.entries(others)) await writeFile(join(dir, name), text);
    const next = random(20);
    const pairs = new Map<number, string>(); // temperature -> weights hash: one pairing only
    for (let round = 0; round < 10; round++) {
      const child = spawn(process.execPath, [SAVE_LOOP, dir], { stdio: ['ignore', 'pipe', 'inherit'] });
      await new Promise<void>((ready, fail) => {
        child.stdout.on('data', (chunk: Buffer) => {
          if (chunk.toString().includes('ready')) ready();
        });
        child.on('exit', (code) => fail(new Error(`the save loop ended by itself (${code})`)));
      });
      // Let it save a few times, then kill it somewhere in a save.
      await new Promise((done) => setTimeout(done, 20 + next() * 80));
      const ended = new Promise((done) => child.on('exit', done));
      child.kill('SIGKILL');
      await ended;

      const model = await loadModel(dir);
      model.network.dispose();
      const info = await readModelInfo(dir);
      expect(info.weightsSha256).toBe(model.meta.weightsSha256);
      const seen = pairs.get(model.meta.temperature) ?? model.meta.weightsSha256;
      expect(model.meta.weightsSha256, `round ${round}`).toBe(seen);
      pairs.set(model.meta.temperature, seen);
    }
    // Both sets were seen whole, so the kills landed in different saves.
    expect(pairs.size).toBe(2);
    for (const [name, text] of Object.entries(others)) expect(await readFile(join(dir, name), 'utf8')).toBe(text);

    // The next save finishes or removes what the killed processes left.
    await saveUntrainedModel(dir, 'after-the-kills');
    expect((await readdir(dir)).sort()).toEqual([...MODEL_FILES, ...Object.keys(others)].sort());
    expect((await readModelInfo(dir)).name).toBe('after-the-kills');
  });

  it('a swap cut short is read from its staged set and finished by the next tidy', async () => {
    const dir = join(root, 'cut-short');
    const newer = join(root, 'newer');
    await saveUntrainedModel(dir, 'older', 3);
    await saveUntrainedModel(newer, 'newer', 4);
    // As a process killed after swapping in the weights only would leave it.
    const staged = join(dir, `.kinhue-save-${deadPid()}-0a1b2c3d`);
    await cp(newer, staged, { recursive: true });
    await cp(join(newer, 'weights.bin'), join(dir, 'weights.bin'));

    expect((await readModelInfo(dir)).name).toBe('newer');
    await tidyModelFolder(dir);
    expect((await readdir(dir)).sort()).toEqual(MODEL_FILES);
    for (const name of MODEL_FILES) expect(sha256(await readFile(join(dir, name)))).toBe(sha256(await readFile(join(newer, name))));
  });

  it("removes a dead process's temporary files and folders, and keeps a live one's", async () => {
    const dir = join(root, 'leftovers');
    await saveUntrainedModel(dir);
    const dead = deadPid();
    const live = process.ppid;
    const leftovers = [
      `.kinhue-save-${dead}-00000000`,
      `.kinhue-swap-${dead}-11111111-weights.bin`,
      `weights.bin.${dead}.mabc12.tmp`,
      `training-checkpoint.bin.${dead}.deadbeef.tmp`,
      `.kinhue-save-${dead}@${hostLabel()}.33333333`,
      `.kinhue-swap-${dead}@${hostLabel()}.44444444-model.json`,
      `training-log.jsonl.${dead}@${hostLabel()}.0badf00d.tmp`,
    ];
    await mkdir(join(dir, leftovers[0]!));
    await writeFile(join(dir, leftovers[0]!, 'weights.bin'), 'half');
    for (const name of leftovers.slice(1)) await writeFile(join(dir, name), 'half');
    const kept = [`.kinhue-save-${live}-22222222`, `.kinhue-save-${live}@${hostLabel()}.55555555`];
    // Another machine's process id says nothing here (a shared file system): its files are kept.
    const otherMachine = `.kinhue-swap-${dead}@elsewhere.66666666-weights.bin`;
    for (const name of kept) await mkdir(join(dir, name));
    await writeFile(join(dir, otherMachine), 'half');

    await saveUntrainedModel(dir);
    expect((await readdir(dir)).sort()).toEqual([...kept, otherMachine, ...MODEL_FILES].sort());
  });
});

// Training speed on worker threads (`kinhue train --workers`): samples per second with 1 worker (the
// run's own thread), 2 workers and one per core, the CPU time per sample (all threads of the process),
// and the ratio to one worker (goal, issue 13: 2 workers at least 1.7x one on a 2-core machine).
// As `train` runs by default: the network with the backbone's features beside L*, 16 crops of 128 x 128
// a step drawn by the crop sampler from 40 photos of 320 x 240 (seeded stand-ins for photos and their
// backbone features: speed does not depend on the values); with workers, each cuts its own crops and
// those of the next step while the optimiser runs, as in the fit loop. Also the main thread's share of
// a step: the Adam update it applies while the workers wait, and all its CPU time a step (Linux).
// Every thread compiles its hot WebAssembly and JavaScript anew and its heap settles over the first
// steps (CPU per step falls for about 5 of them), so the timed steps follow untimed ones.
// The machine's load average is printed first: on a shared machine the figures say little without it.
// KINHUE_BENCH_STEPS sets the timed steps per count (default 8), KINHUE_BENCH_WARMUP the untimed ones
// before them (default 5). Figures only.
import { seededUniform } from '../dist/random.js';
import { readFileSync } from 'node:fs';
import { availableParallelism, loadavg } from 'node:os';
import { abBins, BACKBONE_CHANNELS, BACKBONE_GRID, createNetwork, createTrainer, initBackend } from '../dist/model/index.js';
import { BACKBONE_PHOTO_SIZE, CropSampler, ParallelTrainer, Random } from '../dist/training/index.js';

const CROP = 128;
const BATCH = 16;
const STEPS = Number(process.env.KINHUE_BENCH_STEPS ?? 8);
const WARMUP = Number(process.env.KINHUE_BENCH_WARMUP ?? 5);

const backend = await initBackend();
const bins = abBins();
const classWeights = new Float32Array(bins.count).fill(1);

/** This thread's CPU time in ms, where Linux gives it (/proc/thread-self/schedstat); else undefined. */
function threadCpuMs() {
  try {
    return Number(readFileSync('/proc/thread-self/schedstat', 'utf8').split(' ')[0]) / 1e6;
  } catch {
    return undefined;
  }
}

function cpuMs() {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

/** Seeded stand-ins for the training photos and their backbone features (both ways round). */
function photos(count) {
  const next = seededUniform(2463534242);
  const w = BACKBONE_PHOTO_SIZE;
  const h = (BACKBONE_PHOTO_SIZE * 3) / 4;
  const C = BACKBONE_CHANNELS;
  const plane = (n, f) => new Float32Array(n).map(f);
  const features = () => ({
    local8: plane(BACKBONE_GRID.local8 ** 2 * C.local8, () => next() - 0.5),
    local16: plane(BACKBONE_GRID.local16 ** 2 * C.local16, () => next() - 0.5),
    global: plane(C.global, () => next() - 0.5),
  });
  const list = Array.from({ length: count }, (_, k) => ({
    file: `photo-${k}`,
    width: w,
    height: h,
    L: plane(w * h, (_, i) => 50 + 30 * Math.sin(i / 37 + k) + 10 * next()),
    a: plane(w * h, () => 80 * next() - 40),
    b: plane(w * h, () => 80 * next() - 40),
  }));
  return { list, features: list.map(() => ({ plain: features(), mirrored: features() })) };
}

const pool = photos(40);
const load = loadavg()
  .map((x) => x.toFixed(2))
  .join(', ');
console.log(`backend                          ${backend.name}${backend.warning ? ` (${backend.warning})` : ''}`);
console.log(`cores                            ${availableParallelism()}; load average (1, 5, 15 min) before: ${load}`);
console.log(
  `network                          train's default (backbone features beside L*), ${BATCH} crops of ${CROP} x ${CROP} a step, ${STEPS} timed steps each after ${WARMUP} untimed`,
);

const counts = [...new Set([1, 2, availableParallelism()])].filter((k) => k <= BATCH);
/** One run per count of workers, each with its own network, sampler and figures. */
const runs = counts.map((workers) => {
  const network = createNetwork({ bins: bins.count, backbone: true });
  const trainer = createTrainer(network, { learningRate: 1e-3, classWeights });
  const parallel =
    workers > 1
      ? new ParallelTrainer(network, trainer, { workers, classWeights, backend: backend.name, photos: pool.list, features: pool.features })
      : undefined;
  const sampler = new CropSampler(pool.list, new Random(1), undefined, pool.features);
  let ahead;
  const step = async () => {
    if (!parallel) {
      const batch = sampler.next(BATCH, CROP);
      return trainer.step(batch.L, batch.ab, BATCH, CROP, CROP, batch.borrowed);
    }
    const draws = ahead ?? sampler.draw(BATCH, CROP);
    ahead = sampler.draw(BATCH, CROP);
    return parallel.step(draws, CROP, ahead);
  };
  return { workers, network, trainer, parallel, step, wall: 0, cpu: 0, main: 0 };
});
try {
  // Untimed: workers start, kernels compile and tier up, heaps grow.
  for (let i = 0; i < WARMUP; i++) for (const run of runs) await run.step();
  // Taken in turns, step by step, so that a change in the machine's load falls on every count alike.
  for (let i = 0; i < STEPS; i++) {
    for (const run of runs) {
      const c0 = cpuMs();
      const m0 = threadCpuMs();
      const t0 = performance.now();
      await run.step();
      run.wall += (performance.now() - t0) / 1000;
      run.cpu += cpuMs() - c0;
      run.main += m0 === undefined ? Number.NaN : threadCpuMs() - m0;
    }
  }
  const single = (STEPS * BATCH) / runs[0].wall;
  for (const run of runs) {
    const rate = (STEPS * BATCH) / run.wall;
    console.log(
      `${String(run.workers).padStart(2)} worker${run.workers === 1 ? ' ' : 's'}                       ${rate.toFixed(2)} samples/s wall, ` +
        `${(run.cpu / (STEPS * BATCH)).toFixed(0)} ms CPU per sample, ${(rate / single).toFixed(2)}x one worker` +
        (run.workers === 2 ? ' (goal: 1.7x on 2 cores)' : ''),
    );
  }
  const last = runs.at(-1);
  const grads = last.trainer.values().map((v) => new Float32Array(v.length).fill(1e-4));
  const a0 = performance.now();
  for (let i = 0; i < 5; i++) last.trainer.applyGradients(grads);
  const adam = (performance.now() - a0) / 5;
  const weights = grads.reduce((sum, g) => sum + g.length, 0);
  console.log(
    `main thread per step             Adam on ${weights.toLocaleString('en')} weights: ${adam.toFixed(0)} ms ` +
      `(${((adam / 1000 / (last.wall / STEPS)) * 100).toFixed(1)}% of a step on ${last.workers} workers)` +
      (Number.isNaN(last.main) ? '' : `; all its work there: ${(last.main / STEPS).toFixed(0)} ms CPU a step`),
  );
} finally {
  for (const run of runs) {
    await run.parallel?.close();
    run.trainer.dispose();
    run.network.dispose();
  }
}

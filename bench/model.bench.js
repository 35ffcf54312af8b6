// Size and speed of the colour model on this machine, with the backend kinhue picks (tfjs-node,
// else WebAssembly, else plain JavaScript; set KINHUE_BENCH_BACKEND=wasm|cpu|node to prefer one).
// Prints: parameters, GFLOPs per 512 x 384 image, inference milliseconds per 512 x 384 image,
// training samples per second on 128 x 128 crops in batches of 16 (goal, issue 3: one such step in
// at most 2 s with WebAssembly), and which backend ran. Wall-clock and, since the machine may be
// shared, this process's own CPU time (the backends run on one thread). Figures only.
// Imports dist/model/ alone so that nothing else loads. Uses a freshly created network: speed does
// not depend on the weights.
import * as tf from '@tensorflow/tfjs';
import { abBins, createNetwork, createTrainer, initBackend, networkFlops, predict } from '../dist/model/index.js';

const WIDTH = 512;
const HEIGHT = 384;
const CROP = 128;
const BATCH = 16;

const prefer = process.env.KINHUE_BENCH_BACKEND;
const backend = await initBackend(prefer ? { prefer } : {});
const bins = abBins();
const network = createNetwork({ bins: bins.count });

function cpuMs() {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

function measure(fn, repeats) {
  fn(); // warm-up: kernels set up, memory grown
  const wall = [];
  const cpu = [];
  for (let r = 0; r < repeats; r++) {
    const c0 = cpuMs();
    const t0 = performance.now();
    fn();
    wall.push(performance.now() - t0);
    cpu.push(cpuMs() - c0);
  }
  wall.sort((a, b) => a - b);
  cpu.sort((a, b) => a - b);
  return { best: wall[0], median: wall[Math.floor(repeats / 2)], cpu: cpu[0] };
}

/** A seeded plane of L* values with some structure, and matching a*b* planes. */
function planes(n, w, h) {
  let s = 2463534242;
  const next = () => {
    s ^= s << 13; s >>>= 0; s ^= s >>> 17; s ^= s << 5; s >>>= 0;
    return s / 4294967296;
  };
  const L = new Float32Array(n * w * h).map((_, i) => 50 + 30 * Math.sin(i / 37) + 10 * next());
  const ab = new Float32Array(n * 2 * w * h).map(() => 80 * next() - 40);
  return { L, ab };
}

console.log(`backend                             ${backend.name}${backend.warning ? ` (${backend.warning})` : ''}`);
console.log(`parameters                          ${network.countParams().toLocaleString('en')} (${((network.countParams() * 4) / 1e6).toFixed(1)} MB of float32 weights)`);
console.log(`a*b* bins                           ${bins.count}`);
console.log(`GFLOPs per ${WIDTH} x ${HEIGHT} image          ${(networkFlops(network, WIDTH, HEIGHT) / 1e9).toFixed(2)}`);

const image = planes(1, WIDTH, HEIGHT);
// Both ways of choosing a colour from the prediction (src/model/decoding.ts): the default and the cheaper annealed mean.
for (const decoding of ['least-ciede2000', 'annealed-mean']) {
  const infer = measure(() => predict(network, image.L, WIDTH, HEIGHT, { decoding }), 5);
  console.log(
    `inference per ${WIDTH} x ${HEIGHT} image     ${decoding}: best ${infer.best.toFixed(0)} ms, median ${infer.median.toFixed(0)} ms wall; ${infer.cpu.toFixed(0)} ms CPU`,
  );
}

const trainer = createTrainer(network, { learningRate: 1e-3, classWeights: new Float32Array(bins.count).fill(1) });
const batch = planes(BATCH, CROP, CROP);
const tensorsBefore = tf.memory().numTensors;
const step = measure(() => trainer.step(batch.L, batch.ab, BATCH, CROP, CROP), 4);
console.log(
  `training step, ${BATCH} crops of ${CROP} x ${CROP}    best ${(step.best / 1000).toFixed(2)} s, median ${(step.median / 1000).toFixed(2)} s wall; ${(step.cpu / 1000).toFixed(2)} s CPU (goal: 2 s)`,
);
console.log(
  `training samples per second         ${((BATCH * 1000) / step.best).toFixed(1)} wall (best), ${((BATCH * 1000) / step.cpu).toFixed(1)} per CPU second`,
);
console.log(`tensors held after the steps        ${tf.memory().numTensors - tensorsBefore} more than before`);
trainer.dispose();
network.dispose();

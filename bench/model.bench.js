// Size and speed of the colour model on this machine, with the backend kinhue picks (tfjs-node,
// else ONNX Runtime for the model, else WebAssembly, else plain JavaScript; set
// KINHUE_BENCH_BACKEND=node|onnxruntime|wasm|cpu to prefer one). The shipped model's inference is
// printed for ONNX Runtime and WebAssembly both, with what the in-memory ONNX export costs at load.
// Prints: parameters, GFLOPs per 512 x 384 image, inference milliseconds per 512 x 384 image,
// training samples per second on 128 x 128 crops in batches of 16 (goal, issue 3: one such step in
// at most 2 s with WebAssembly), and which backend ran. Wall-clock and, since the machine may be
// shared, this process's own CPU time (the backends run on one thread). Figures only.
// Imports dist/model/ alone so that nothing else loads. Uses a freshly created network: speed does
// not depend on the weights.
import { seededUniform } from '../dist/random.js';
import * as tf from '@tensorflow/tfjs';
import { existsSync } from 'node:fs';
import { join } from 'node:path';
import {
  abBins,
  BACKBONE_OUTPUTS,
  backboneFeatures,
  createNetwork,
  createTrainer,
  DEFAULT_MODEL_DIR,
  graphModelToOnnx,
  initBackend,
  loadModel,
  networkFlops,
  networkToOnnx,
  OnnxSession,
  onnxRuntimeVersion,
  predict,
} from '../dist/model/index.js';

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
  const next = seededUniform(2463534242);
  const L = new Float32Array(n * w * h).map((_, i) => 50 + 30 * Math.sin(i / 37) + 10 * next());
  const ab = new Float32Array(n * 2 * w * h).map(() => 80 * next() - 40);
  return { L, ab };
}

console.log(
  `backend                             ${backend.name}, the model on ${backend.model}${backend.warning ? ` (${backend.warning})` : ''}`,
);
console.log(
  `parameters                          ${network.countParams().toLocaleString('en')} (${((network.countParams() * 4) / 1e6).toFixed(1)} MB of float32 weights)`,
);
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

// The shipped model (with its backbone) on each backend that runs a model here, then back to the run's own.
if (existsSync(join(DEFAULT_MODEL_DIR, 'kinhue-model.json'))) {
  const shipped = await loadModel(DEFAULT_MODEL_DIR);
  for (const model of onnxRuntimeVersion() ? ['onnxruntime', 'wasm'] : ['wasm']) {
    const info = await initBackend({ prefer: model });
    const run = measure(() => predict(shipped, image.L, WIDTH, HEIGHT), 3);
    const features = backboneFeatures(shipped.backbone, image.L, WIDTH, HEIGHT);
    const backbone = measure(() => backboneFeatures(shipped.backbone, image.L, WIDTH, HEIGHT), 3);
    const rest = measure(() => predict(shipped, image.L, WIDTH, HEIGHT, { features }), 3);
    const bare = measure(() => predict(shipped, image.L, WIDTH, HEIGHT, { features, pooling: false, decoding: 'annealed-mean' }), 3);
    console.log(
      `shipped model per ${WIDTH} x ${HEIGHT} image  ${info.model}: best ${run.best.toFixed(0)} ms, median ${run.median.toFixed(0)} ms wall; ${run.cpu.toFixed(0)} ms CPU, ` +
        `of which backbone ${backbone.cpu.toFixed(0)}, network (with the cheap annealed mean) ${bare.cpu.toFixed(0)}, region pooling and least-CIEDE2000 decoding ${Math.max(0, rest.cpu - bare.cpu).toFixed(0)}`,
    );
  }
  if (onnxRuntimeVersion()) {
    // What exporting at load costs (each restore worker does it once), against shipping .onnx files.
    const c0 = cpuMs();
    const netBytes = networkToOnnx(shipped.network);
    const c1 = cpuMs();
    new OnnxSession(netBytes).dispose();
    const c2 = cpuMs();
    const graphBytes = graphModelToOnnx(
      JSON.parse(Buffer.from(shipped.backbone.topology).toString('utf8')),
      shipped.backbone.weights,
      BACKBONE_OUTPUTS,
    );
    const c3 = cpuMs();
    new OnnxSession(graphBytes).dispose();
    const c4 = cpuMs();
    console.log(
      `ONNX export at load, ms CPU           network ${(c1 - c0).toFixed(0)} (${(netBytes.length / 1e6).toFixed(1)} MB) + session ${(c2 - c1).toFixed(0)}; ` +
        `backbone ${(c3 - c2).toFixed(0)} (${(graphBytes.length / 1e6).toFixed(1)} MB) + session ${(c4 - c3).toFixed(0)}`,
    );
  }
  shipped.network.dispose();
  await initBackend(prefer ? { prefer } : {});
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

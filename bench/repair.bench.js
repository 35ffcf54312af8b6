// Scan repair against the goals of issue 15, on seeded synthetic damage with a known mask, for the
// classical detector (top-hat, median fill) and the repair network (models/kinhue-repair, or the folder
// in KINHUE_BENCH_REPAIR_MODEL). Prints detection precision and recall (2 px tolerance); PSNR over the
// damaged pixels of the median fill and of the network's fill on the true mask; how much of an undamaged
// scan (plain, grainy, soft) changes; and the CPU time repair adds to the restore of a 6 MP scan.
// Photos: the tenth of .data/pool (or KINHUE_BENCH_POOL) that train-repair holds out, else the demo
// album's colour originals; and soft synthetic scenes. Figures only, no assertions.
import { existsSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const root = join(here, '..');
const repair = await import(join(root, 'dist', 'repair', 'index.js'));
const training = await import(join(root, 'dist', 'training', 'index.js'));
const kinhue = await import(join(root, 'dist', 'index.js'));
const colour = await import(join(root, 'dist', 'colour', 'index.js'));
const sharp = (await import('sharp')).default;

const pool = process.env.KINHUE_BENCH_POOL ?? join(root, '.data', 'pool');
const MAX_SIDE = 1024;
let files;
let source;
if (existsSync(pool)) {
  files = (await repair.repairPhotoSplit(pool)).holdout;
  source = `${files.length} held-out photos of .data/pool (seed 1), long side ${MAX_SIDE}`;
} else {
  const originals = join(root, 'demo-photos', 'originals');
  files = readdirSync(originals).map((f) => join(originals, f));
  source = `${files.length} demo originals (no .data/pool), long side ${MAX_SIDE}`;
}
const photos = await repair.readRepairPhotos(files, MAX_SIDE);

const modelDir = process.env.KINHUE_BENCH_REPAIR_MODEL ?? join(root, 'models', 'kinhue-repair');
let model;
if (existsSync(join(modelDir, 'repair-model.json'))) {
  await (await import(join(root, 'dist', 'model', 'index.js'))).initBackend();
  model = await repair.loadRepairModel(modelDir);
}

function measure(label, planes, seed) {
  const rng = new training.Random(seed);
  const add = (a, b) => ({ sum: a.sum + b.sum, count: a.count + b.count });
  const zero = { sum: 0, count: 0 };
  const methods = ['classical', ...(model ? ['network'] : [])];
  const detections = Object.fromEntries(methods.map((m) => [m, []]));
  const errors = { damaged: zero, median: zero, network: zero };
  const changes = Object.fromEntries(methods.map((m) => [m, { plain: [], grainy: [], soft: [] }]));
  const find = {
    classical: (L, w, h) => {
      const mask = repair.detectDamage(L, w, h).mask;
      return { mask, filled: repair.medianFill(L, w, h, mask) };
    },
    network: (L, w, h) => {
      const found = repair.networkRepair(L, w, h, model);
      return { mask: found.mask, filled: model.meta.fill === 'median' ? repair.medianFill(L, w, h, found.mask) : found.filled };
    },
  };
  for (const p of planes) {
    const d = repair.drawDamage(p.L, p.width, p.height, rng);
    for (const m of methods)
      detections[m].push(repair.detectionFigures(find[m](d.L, p.width, p.height).mask, d.mask, p.width, p.height, 2));
    errors.damaged = add(errors.damaged, repair.maskedSquaredError(d.L, d.clean, d.mask));
    errors.median = add(errors.median, repair.maskedSquaredError(repair.medianFill(d.L, p.width, p.height, d.mask), d.clean, d.mask));
    if (model)
      errors.network = add(
        errors.network,
        repair.maskedSquaredError(repair.networkPlanes(d.L, p.width, p.height, model).lightness, d.clean, d.mask),
      );
    const undamaged = {
      plain: p.L,
      grainy: (() => {
        const g = Float32Array.from(p.L);
        repair.addGrain(g, rng, 2.5);
        return g;
      })(),
      soft: repair.boxMean(repair.boxMean(p.L, p.width, p.height, 1), p.width, p.height, 1),
    };
    for (const [kind, L] of Object.entries(undamaged)) {
      for (const m of methods) {
        const r = find[m](L, p.width, p.height);
        changes[m][kind].push(repair.changeFigures(L, repair.keepUnmasked(L, r.filled, r.mask)));
      }
    }
  }
  console.log(`\n${label}`);
  for (const m of methods) {
    const pooled = repair.poolDetection(detections[m]);
    const lowest = Math.min(...detections[m].map((d) => d.recall));
    console.log(
      `  ${m.padEnd(9)} detection (goal: recall >= 0.9, precision >= 0.8): recall ${pooled.recall.toFixed(3)}, precision ${pooled.precision.toFixed(3)}` +
        ` (pooled over ${planes.length}; lowest recall of one picture ${lowest.toFixed(3)})`,
    );
  }
  console.log(
    `  fill on the true mask, PSNR dB over the damaged pixels (peak L* 100; goal: network >= median + 2): damaged ${repair.psnrOf(errors.damaged).toFixed(2)},` +
      ` median fill ${repair.psnrOf(errors.median).toFixed(2)}${model ? `, network ${repair.psnrOf(errors.network).toFixed(2)}` : ' (no network model found)'}`,
  );
  for (const m of methods) {
    for (const [kind, list] of Object.entries(changes[m])) {
      const mean = (f) => list.reduce((s, c) => s + f(c), 0) / list.length;
      const worst = Math.max(...list.map((c) => c.changedShare));
      console.log(
        `  ${m.padEnd(9)} undamaged ${kind.padEnd(6)} (goal: <= 0.1% changed, mean |dL*| < 0.2): ${(100 * mean((c) => c.changedShare)).toFixed(3)}% changed on average,` +
          ` worst ${(100 * worst).toFixed(3)}%; mean |dL*| ${mean((c) => c.meanAbsDelta).toFixed(4)}`,
      );
    }
  }
}

console.log(
  `Scan repair: the classical detector (top-hat, median fill) and ${
    model
      ? `the network in ${modelDir} as restore uses it (detection ${model.meta.detection}, threshold ${model.meta.threshold}, ${model.meta.fill} fill)`
      : 'no network (none found)'
  }`,
);
measure(`Photos: ${source}`, photos, 15);
measure(
  'Soft synthetic scenes: 6 of 768 x 512',
  [1, 2, 3, 4, 5, 6].map(() => ({ width: 768, height: 512, L: repair.softScene(768, 512) })),
  16,
);

// Cost: CPU time of restoring one 6 MP 8-bit grey JPEG with light damage (one worker thread, the models
// loaded by each run), without and with --repair (the shipped repair model). process.cpuUsage covers the worker threads, which share the process.
const dir = mkdtempSync(join(tmpdir(), 'kinhue-repair-bench-'));
try {
  const w = 3000,
    h = 2000;
  const plane = new Float32Array(w * h);
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) plane[y * w + x] = 50 + 25 * Math.sin(x / 230) * Math.cos(y / 170);
  const damaged = repair.drawDamage(plane, w, h, new training.Random(3), { perMegapixel: 30 });
  const grey = colour.lightnessToGrey(damaged.L, new Uint8Array(w * h));
  const scan = join(dir, 'scan.jpg');
  await sharp(grey, { raw: { width: w, height: h, channels: 1 } })
    .toColourspace('b-w')
    .jpeg({ quality: 92 })
    .toFile(scan);
  const cpu = async (options) => {
    const before = process.cpuUsage();
    const summary = await kinhue.restore({ inputs: [scan], jobs: 1, ...options });
    if (summary.done !== 1) throw new Error(`the restore did not finish: ${JSON.stringify(summary.failed)}`);
    const used = process.cpuUsage(before);
    return (used.user + used.system) / 1e6;
  };
  await cpu({ out: join(dir, 'warm') });
  const plain = await cpu({ out: join(dir, 'plain') });
  const repaired = await cpu({ out: join(dir, 'repaired'), repair: true });
  console.log(
    `\nCost on a 6 MP scan (goal: repair adds at most 30%): restore ${plain.toFixed(2)} CPU s, with --repair ${repaired.toFixed(2)} CPU s,` +
      ` +${(100 * (repaired / plain - 1)).toFixed(0)}%`,
  );
} finally {
  rmSync(dir, { recursive: true, force: true });
}

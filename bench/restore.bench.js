// Restore throughput and memory. Prints, for a folder of 6-megapixel 8-bit JPEG scans: images per minute
// with --jobs 1 and --jobs 2, both as a whole run (start-up included) and in steady state (a run of 2 scans
// subtracted from the run of all, which cancels the start-up), the time of decode plus encode alone on the
// same files (the floor) and the ratio to it, CPU time per image, the time per stage and the backend that
// ran the model (and, where that is ONNX Runtime, the same at --jobs 1 with TensorFlow.js on WebAssembly);
// the CPU time of each stage for one scan in one process; then the peak resident memory of restoring a
// 100-megapixel 16-bit greyscale TIFF.
// Goal (issue 13): --jobs 2 at least 100 images per minute on a 2-core machine, within 2.5x the floor.
// Figures only, no assertions.
// Uses models/kinhue-base when present, else a freshly created (untrained) network of the default size:
// colour quality plays no part in speed.
import { spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { availableParallelism, loadavg, tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const root = join(here, '..');
const kinhue = {
  ...(await import(join(root, 'dist', 'index.js'))),
  // Not in the public API: an untrained network for the speed figures, and the image codec.
  ...(await import(join(root, 'dist', 'model', 'index.js'))),
  ...(await import(join(root, 'dist', 'image', 'index.js'))),
};
const BIN = join(root, 'bin', 'kinhue.js');
const SCANS = Number(process.env.KINHUE_BENCH_SCANS ?? 8);
const WIDTH = 3000;
const HEIGHT = 2000;

// Child modes: make the 100-MP TIFF, or restore in this process and report peak memory (worker threads
// share the process, so maxRSS covers them).
if (process.argv[2] === '--make-big-tiff') {
  const sharp = (await import('sharp')).default;
  const [path, side] = [process.argv[3], Number(process.argv[4])];
  const data = new Uint16Array(side * side);
  let s = 12345;
  for (let y = 0; y < side; y++) {
    for (let x = 0; x < side; x++) {
      s = (s * 1103515245 + 12345) >>> 0;
      const disc = Math.hypot(x - side * 0.4, y - side * 0.5) < side * 0.25;
      data[y * side + x] = Math.round((disc ? 14000 : 30000 + (25000 * x) / side) + ((s >>> 16) % 2000));
    }
  }
  await sharp(data, { raw: { width: side, height: side, channels: 1 } })
    .toColourspace('grey16')
    .tiff({ compression: 'deflate', predictor: 'horizontal' })
    .toFile(path);
  process.exit(0);
}
if (process.argv[2] === '--restore-in-process') {
  const [input, out, model] = process.argv.slice(3);
  const t0 = performance.now();
  const summary = await kinhue.restore({ inputs: [input], out, model, jobs: 1 });
  const seconds = (performance.now() - t0) / 1000;
  console.log(JSON.stringify({ seconds, maxRssMB: process.resourceUsage().maxRSS / 1024, done: summary.done, failed: summary.failed }));
  process.exit(0);
}

if (process.argv[2] === '--stage-cpu') {
  console.log(JSON.stringify(await stageCpu(process.argv.slice(4), process.argv[3])));
  process.exit(0);
}

const tmp = mkdtempSync(join(tmpdir(), 'kinhue-bench-restore-'));
try {
  await main();
} finally {
  rmSync(tmp, { recursive: true, force: true });
}

async function main() {
  const sharp = (await import('sharp')).default;
  let modelDir = join(root, 'models', 'kinhue-base');
  if (!existsSync(join(modelDir, 'kinhue-model.json'))) {
    await kinhue.initBackend();
    const network = kinhue.createNetwork({ seed: 1 });
    modelDir = join(tmp, 'model');
    await kinhue.saveModel(network, modelDir, { name: 'bench-untrained' });
    network.dispose();
    console.log('model: a fresh untrained network of the default size (models/kinhue-base not present)');
  } else console.log(`model: ${modelDir}`);

  // Sepia-toned grainy scans, 3000 x 2000 (6 MP), 8-bit RGB JPEG at quality 90.
  const scans = join(tmp, 'scans');
  mkdirSync(scans);
  const rgb = new Uint8Array(WIDTH * HEIGHT * 3);
  for (let k = 0; k < SCANS; k++) {
    let s = 777 + k;
    for (let y = 0; y < HEIGHT; y++) {
      for (let x = 0; x < WIDTH; x++) {
        s = (s * 1103515245 + 12345) >>> 0;
        const disc = Math.hypot(x - WIDTH * (0.3 + 0.05 * k), y - HEIGHT * 0.5) < HEIGHT * 0.3;
        const band = Math.sin((x + y * (k + 1)) / 90) > 0.6;
        const v = Math.max(0, Math.min(237, (disc ? 70 : band ? 150 : 190 - (60 * y) / HEIGHT) + ((s >>> 16) % 24) - 12));
        const i = (y * WIDTH + x) * 3;
        rgb[i] = v + 18;
        rgb[i + 1] = Math.round(v * 0.86 + 8);
        rgb[i + 2] = Math.round(v * 0.68);
      }
    }
    await sharp(rgb, { raw: { width: WIDTH, height: HEIGHT, channels: 3 } })
      .jpeg({ quality: 90 })
      .toFile(join(scans, `scan-${String(k + 1).padStart(2, '0')}.jpg`));
  }
  const files = readdirSync(scans).map((f) => join(scans, f));
  console.log(
    `load average before: ${loadavg()
      .map((v) => v.toFixed(1))
      .join(' ')} (other work on the machine slows every figure but CPU time)`,
  );
  console.log(
    `${files.length} scans of ${WIDTH} x ${HEIGHT} (${((WIDTH * HEIGHT) / 1e6).toFixed(0)} MP), 8-bit JPEG; ${availableParallelism()} cores`,
  );

  // The floor: decode plus encode alone, one file after another on one core (kinhue's own image module).
  const floorOut = join(tmp, 'floor');
  mkdirSync(floorOut);
  const f0 = performance.now();
  for (const f of files) {
    const img = await kinhue.decodeImage(f);
    const px = img.pixels;
    // The result is RGB: encode 3 channels as restore does.
    const rgb = px.channels >= 3 ? px : { ...px, channels: 3, data: expandGrey(px.data) };
    await kinhue.encodeImage(rgb, join(floorOut, `${img.path.split('/').pop()}`), { format: 'jpeg', exif: img.exif, icc: img.icc });
  }
  const floorPerImage = (performance.now() - f0) / 1000 / files.length;
  console.log(
    `floor (decode + encode alone, 1 core): ${floorPerImage.toFixed(2)} s per image, ${(60 / floorPerImage).toFixed(1)} images/min`,
  );

  // The backend kinhue picks, at one and two jobs; then, where that is ONNX Runtime, TensorFlow.js on
  // WebAssembly alone (KINHUE_BACKEND=wasm) at one job, so that the model stage compares per backend.
  // Each setting also restores the first 2 scans alone: the difference between the two runs is the
  // steady state of a long batch, without the start-up (workers, model, ONNX export, face finder).
  const few = join(tmp, 'few');
  mkdirSync(few);
  for (const f of files.slice(0, 2)) copyFileSync(f, join(few, f.split('/').pop()));
  const runs = [{ jobs: 1 }, { jobs: 2 }];
  const ratios = {};
  for (let k = 0; k < runs.length; k++) {
    const { jobs, backend } = runs[k];
    const label = `restore --jobs ${jobs}${backend ? ` (KINHUE_BACKEND=${backend})` : ''}`;
    const all = timedRestore(scans, join(tmp, `out-${k}`), modelDir, jobs, backend);
    if (all.error) {
      console.log(`${label} failed: ${all.error}`);
      continue;
    }
    const part = timedRestore(few, join(tmp, `few-${k}`), modelDir, jobs, backend);
    const records = files.map((f) =>
      JSON.parse(
        readFileSync(
          join(
            all.out,
            f
              .split('/')
              .pop()
              .replace(/\.jpg$/, '.kinhue.json'),
          ),
          'utf8',
        ),
      ),
    );
    const stage = (k) => mean(records.map((x) => x.timings[k]));
    const perImage = all.seconds / files.length;
    console.log(
      `${label}: ${(60 / perImage).toFixed(1)} images/min (${all.seconds.toFixed(1)} s for ${files.length}, start-up included); ` +
        `ratio to the floor ${(perImage / floorPerImage).toFixed(1)}x`,
    );
    const n = files.length - 2;
    if (!part.error && all.seconds > part.seconds) {
      const steady = (all.seconds - part.seconds) / n;
      ratios[label] = steady / floorPerImage;
      console.log(
        `  steady state (${files.length} scans minus 2, start-up cancelled): ${(60 / steady).toFixed(1)} images/min; ` +
          `ratio to the floor ${(steady / floorPerImage).toFixed(1)}x; start-up about ${(part.seconds - 2 * steady).toFixed(1)} s`,
      );
    } else console.log(`  steady state: not measured (${part.error ?? 'the 2-scan run took as long as the whole run'})`);
    if (all.cpuSeconds !== undefined) {
      const steadyCpu = part.cpuSeconds !== undefined ? ` (steady state ${((all.cpuSeconds - part.cpuSeconds) / n).toFixed(2)} s)` : '';
      console.log(
        `  CPU time ${(all.cpuSeconds / files.length).toFixed(2)} s per image, all threads, start-up included${steadyCpu}: ` +
          `${((60 * availableParallelism()) / (all.cpuSeconds / files.length)).toFixed(1)} images/min if all ${availableParallelism()} cores were free for it`,
      );
    }
    console.log(
      `  per image, ms of wall time (mean): decode ${stage('decode')}, working size ${stage('lightness')}, model ${stage('model')}, ` +
        `colour ${stage('colour')}, encode ${stage('encode')}, total ${stage('total')}; backend ${records[0].backend}`,
    );
    if (k === 0 && records[0].backend === 'onnxruntime') runs.push({ jobs: 1, backend: 'wasm' });
  }
  const two = ratios['restore --jobs 2'];
  if (two !== undefined) {
    const rate = 60 / (two * floorPerImage);
    console.log(
      `goal: --jobs 2 at least 100 images/min and within 2.5x the floor (steady state): ${rate.toFixed(1)} images/min, ${two.toFixed(1)}x: ` +
        `${rate >= 100 && two <= 2.5 ? 'met' : 'not met'}`,
    );
  }

  // CPU time of each stage for one scan, in this process's child on one core (process.cpuUsage: all its
  // threads, so libvips' and ONNX Runtime's threads count), after a first scan that warms everything up.
  const cpu = spawnSync(process.execPath, [fileURLToPath(import.meta.url), '--stage-cpu', modelDir, ...files.slice(0, 3)], {
    encoding: 'utf8',
  });
  if (cpu.status === 0) {
    const t = JSON.parse(cpu.stdout.trim().split('\n').pop());
    console.log(
      `per image at 1 job, CPU ms by stage (mean of scans 2-3, one process): ${Object.entries(t)
        .map(([k, v]) => `${k} ${v}`)
        .join(', ')}`,
    );
  } else console.log(`stage CPU times failed: ${cpu.stderr.slice(-300)}`);

  // Peak memory for a 100-megapixel 16-bit greyscale TIFF (10000 x 10000).
  const side = Number(process.env.KINHUE_BENCH_BIG_SIDE ?? 10000);
  const bigDir = join(tmp, 'big');
  mkdirSync(bigDir);
  const big = join(bigDir, 'big-16bit-grey.tif');
  const made = spawnSync(process.execPath, [fileURLToPath(import.meta.url), '--make-big-tiff', big, String(side)], { encoding: 'utf8' });
  if (made.status !== 0) {
    console.log(`could not make the ${side} x ${side} TIFF: ${made.stderr.slice(-300)}`);
    return;
  }
  const r = spawnSync(process.execPath, [fileURLToPath(import.meta.url), '--restore-in-process', big, join(tmp, 'big-out'), modelDir], {
    encoding: 'utf8',
  });
  if (r.status !== 0) {
    console.log(`restoring the ${side} x ${side} TIFF failed (exit ${r.status ?? r.signal}): ${r.stderr.slice(-500)}`);
    return;
  }
  const m = JSON.parse(r.stdout.trim().split('\n').pop());
  console.log(
    `${((side * side) / 1e6).toFixed(0)} MP 16-bit grey TIFF: peak resident memory ${m.maxRssMB.toFixed(0)} MB (goal under 2048 MB), ` +
      `${m.seconds.toFixed(1)} s, ${m.done} done${m.failed.length ? `, failed: ${m.failed[0].message}` : ''}`,
  );
}

function expandGrey(data) {
  const out = new data.constructor(data.length * 3);
  for (let i = 0; i < data.length; i++) out[i * 3] = out[i * 3 + 1] = out[i * 3 + 2] = data[i];
  return out;
}

function mean(values) {
  return Math.round(values.reduce((s, v) => s + v, 0) / values.length);
}

/** Restores a folder with the CLI under GNU time (where present: it adds the CPU seconds of all threads). */
function timedRestore(folder, out, modelDir, jobs, backend) {
  const t0 = performance.now();
  const args = [BIN, 'restore', folder, '--out', out, '--model', modelDir, '--jobs', String(jobs), '--json'];
  const env = backend ? { ...process.env, KINHUE_BACKEND: backend } : process.env;
  const timed = existsSync('/usr/bin/time');
  const r = timed
    ? spawnSync('/usr/bin/time', ['-f', 'kinhue-bench-cpu %U %S', process.execPath, ...args], {
        encoding: 'utf8',
        maxBuffer: 64 << 20,
        env,
      })
    : spawnSync(process.execPath, args, { encoding: 'utf8', maxBuffer: 64 << 20, env });
  const seconds = (performance.now() - t0) / 1000;
  if (r.status !== 0) return { error: `exit ${r.status}: ${(r.stderr ?? '').slice(-500)}` };
  const cpuLine = /kinhue-bench-cpu ([\d.]+) ([\d.]+)/.exec(r.stderr ?? '');
  return { out, seconds, cpuSeconds: cpuLine ? Number(cpuLine[1]) + Number(cpuLine[2]) : undefined };
}

/** CPU ms of each restore stage (the pipeline's own steps, in order), mean over all scans but the first. */
async function stageCpu(scans, modelDir) {
  const stages = (name) => import(join(root, 'dist', 'batch', 'stages', `${name}.js`));
  const [{ analyse }, { predictColour }, { applyGuides, skinGuide }, { render, confidenceGrey }, { writeResult }] = await Promise.all(
    ['analyse', 'predict', 'guide', 'render', 'write'].map(stages),
  );
  const { RESTORE_DEFAULTS } = await import(join(root, 'dist', 'batch', 'options.js'));
  await kinhue.initBackend();
  const model = await kinhue.loadModel(modelDir);
  const finder = await kinhue.loadFaceFinder();
  const out = mkdtempSync(join(tmpdir(), 'kinhue-bench-stages-'));
  const sums = {};
  try {
    for (let k = 0; k < scans.length; k++) {
      let c = process.cpuUsage();
      const lap = (name) => {
        const d = process.cpuUsage(c);
        if (k > 0) sums[name] = (sums[name] ?? 0) + (d.user + d.system) / 1000;
        c = process.cpuUsage();
      };
      const scan = await analyse(scans[k], model.meta.workingSize);
      lap('hash, decode, working size');
      const { L, width, height } = scan.working;
      const predicted = await predictColour(L, width, height, model);
      lap('model');
      const { colour } = applyGuides(predicted, [skinGuide(finder)]);
      lap('skin prior');
      const image = render(scan.decoded.pixels, colour, 8);
      lap('colour');
      const name = `scan-${k}`;
      const settings = { ...RESTORE_DEFAULTS, model: 'bench', weightsSha256: '', confidence: true };
      const outputs = { image: `${name}.jpg`, confidence: `${name}.confidence.png`, record: `${name}.kinhue.json`, format: 'jpeg' };
      const grey = { grey: confidenceGrey(colour), width: colour.confidenceWidth, height: colour.confidenceHeight };
      await writeResult(
        { outDir: out, outputs, source: scans[k], sha256: scan.sha256, settings, meanConfidence: 0.5 },
        image,
        { exif: scan.decoded.exif, icc: scan.decoded.icc },
        grey,
      );
      lap('encode (image, confidence map)');
    }
  } finally {
    rmSync(out, { recursive: true, force: true });
  }
  return Object.fromEntries(Object.entries(sums).map(([k, v]) => [k, Math.round(v / (scans.length - 1))]));
}

// Hint propagation (Levin et al. 2004 solver) at 512 x 384 and 1024 x 768, and reference transfer at 512 x 384.
// Input: a demo scan's L* at each size, 10 point hints and a stroke, a flat prediction at confidence 0.5.
// Prints the median of 5 runs after one warm-up, with the load average (the machine may be shared).
import { loadavg } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { greyToLightness, shrinkPlane } from '../dist/colour/index.js';
import { loadReference, parseHints, propagateHints, rasteriseHints, transferReference } from '../dist/hints/index.js';
import { decodeImage } from '../dist/image/index.js';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const scan = await decodeImage(join(root, 'demo-photos/scans/wrenfold-01-hill-pasture.jpg'));
const W = scan.pixels.width,
  H = scan.pixels.height;
const fullL = greyToLightness(scan.pixels.data, scan.pixels.channels);
const lightness = (w, h) => shrinkPlane(fullL, W, H, w, h);
const colours = ['#4f9a4f', '#c0504a', '#3d8fbf', '#8a4a26', '#c08a4a', '#7a6c40', '#6c8cb4', '#b5654f', '#2f5d3a', '#a0a0a0'];
const entries = colours.map((colour, k) => ({
  x: Math.round((((k % 5) + 0.5) * W) / 5),
  y: Math.round(((Math.floor(k / 5) + 0.5) * H) / 2),
  colour,
  radius: 12,
}));
entries.push({
  points: [
    [W * 0.1, H * 0.9],
    [W * 0.5, H * 0.8],
    [W * 0.9, H * 0.9],
  ],
  colour: '#6a7a3a',
  radius: 10,
});
const hints = parseHints(
  JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width: W, height: H }, entries }),
  'bench.hints.json',
);

function median(values) {
  const s = [...values].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

// Wall time, and this process's own CPU time (user + system), which a busy shared machine inflates less.
function time(fn, runs = 5) {
  fn();
  const wall = [],
    cpu = [];
  let last;
  for (let k = 0; k < runs; k++) {
    const t = performance.now(),
      c = process.cpuUsage();
    last = fn();
    const used = process.cpuUsage(c);
    wall.push(performance.now() - t);
    cpu.push((used.user + used.system) / 1000);
  }
  return { ms: median(wall), cpu: median(cpu), last };
}

console.log(
  `load average before: ${loadavg()
    .map((v) => v.toFixed(2))
    .join(' ')} (${W} x ${H} scan, 11 hints)`,
);
for (const [w, h] of [
  [512, 384],
  [1024, 768],
]) {
  const L = lightness(w, h);
  const n = w * h;
  const a = new Float32Array(n).fill(4),
    b = new Float32Array(n).fill(12),
    confidence = new Float32Array(n).fill(0.5);
  const drawn = rasteriseHints(hints, L, w, h, W, H);
  const { ms, cpu, last } = time(() => propagateHints({ width: w, height: h, L, a, b, confidence }, drawn.constraints));
  console.log(
    `propagation ${w} x ${h}: ${ms.toFixed(0)} ms wall, ${cpu.toFixed(0)} ms CPU, medians (affinity, multigrid set-up and solve; ${last.iterations} PCG iterations, residual ${last.residual.toExponential(1)}; goal at 512 x 384: under 1000 ms)`,
  );
}
// The worst case for drawing: 2,000 entries at the largest radius a file allows, each covering the whole grid.
{
  const [w, h] = [400, 266];
  const crowd = Array.from({ length: 2000 }, (_, k) => ({
    x: (k * 37) % W,
    y: (k * 53) % H,
    colour: colours[k % colours.length],
    radius: Math.max(W, H),
  }));
  const many = parseHints(
    JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width: W, height: H }, entries: crowd }),
    'bench-crowd.hints.json',
  );
  const { ms, cpu, last } = time(() => rasteriseHints(many, lightness(w, h), w, h, W, H), 3);
  console.log(
    `drawing 2,000 entries at the maximum radius, ${w} x ${h}: ${ms.toFixed(0)} ms wall, ${cpu.toFixed(0)} ms CPU, medians (${last.pixels} cells held)`,
  );
}
const reference = await loadReference(join(root, 'demo-photos/originals/wrenfold-05-billy-goat.jpg'));
const L = lightness(512, 384);
const { ms, cpu } = time(() => transferReference(reference, L, 512, 384), 3);
console.log(
  `reference transfer 512 x 384: ${ms.toFixed(0)} ms wall, ${cpu.toFixed(0)} ms CPU, medians (${reference.L.length} samples, with edge-aware smoothing)`,
);
console.log(
  `peak resident memory: ${(process.resourceUsage().maxRSS / 1024).toFixed(0)} MB; load average after: ${loadavg()
    .map((v) => v.toFixed(2))
    .join(' ')}`,
);

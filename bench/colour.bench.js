// Speed of the bulk colour conversions on one core (JavaScript runs them on the main thread only).
// Imports dist/colour/ alone so the figures do not wait on loading the model backends.
// Goal (issue 2): 8-bit sRGB -> CIELAB at 10 megapixels per second or more.
import { seededUniform } from '../dist/random.js';
import { greyToLightness, labToSrgb, lightnessToGrey, srgbToLab } from '../dist/colour/index.js';

const WIDTH = 4000,
  HEIGHT = 3000; // a 12-megapixel image
const PIXELS = WIDTH * HEIGHT;
const REPEATS = 5;

/** Random colours (a seeded xorshift), so no pixel takes the grey shortcut. */
function randomImage(channels, Type, max) {
  const data = new Type(PIXELS * channels);
  const next = seededUniform(2463534242);
  for (let i = 0; i < data.length; i++) data[i] = Type === Float32Array ? next() : Math.floor(next() * (max + 1));
  return data;
}

/**
 * Runs fn REPEATS times; prints megapixels per second of wall-clock time (best and median) and, since
 * the machine may be shared, per second of this process's own CPU time (best).
 */
function measure(label, fn) {
  const wall = [];
  const cpu = [];
  for (let r = 0; r < REPEATS; r++) {
    const c0 = process.cpuUsage();
    const t0 = process.hrtime.bigint();
    fn();
    wall.push(Number(process.hrtime.bigint() - t0) / 1e9);
    const c = process.cpuUsage(c0);
    cpu.push((c.user + c.system) / 1e6);
  }
  wall.sort((a, b) => a - b);
  cpu.sort((a, b) => a - b);
  const mp = PIXELS / 1e6;
  const f = (v) => v.toFixed(1).padStart(6);
  console.log(
    `${label.padEnd(24)} wall: best ${f(mp / wall[0])} MP/s, median ${f(mp / wall[Math.floor(REPEATS / 2)])} MP/s;` +
      `  cpu: best ${f(mp / cpu[0])} MP/s`,
  );
}

console.log(`image ${WIDTH} x ${HEIGHT} (${PIXELS / 1e6} MP), ${REPEATS} runs each, node ${process.version}`);

const rgb8 = randomImage(3, Uint8Array, 255);
let lab8;
measure('8-bit sRGB -> CIELAB', () => {
  lab8 = srgbToLab(rgb8, 3);
});
const out8 = new Uint8Array(PIXELS * 3);
measure('CIELAB -> 8-bit sRGB', () => labToSrgb(lab8, out8, 3));

const rgb16 = randomImage(3, Uint16Array, 65535);
let lab16;
measure('16-bit sRGB -> CIELAB', () => {
  lab16 = srgbToLab(rgb16, 3);
});
const out16 = new Uint16Array(PIXELS * 3);
measure('CIELAB -> 16-bit sRGB', () => labToSrgb(lab16, out16, 3));

const grey8 = randomImage(1, Uint8Array, 255);
let L;
measure('8-bit grey -> L*', () => {
  L = greyToLightness(grey8, 1);
});
const greyOut = new Uint8Array(PIXELS);
measure('L* -> 8-bit grey', () => lightnessToGrey(L, greyOut));

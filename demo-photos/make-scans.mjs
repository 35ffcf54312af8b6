#!/usr/bin/env node
// Makes the demo album: old-looking black-and-white "scans" from colour photographs.
//
//   node demo-photos/make-scans.mjs [--from DIR]
//
// --from DIR  (re)make demo-photos/originals/ first, from the full-size demo photos that
//             `models/gather-photos.sh --demo DIR` copies out of the Debian packages.
// Without --from, the scans are remade from the committed originals. Everything is seeded, so
// the output is the same on every run with the same sharp/libvips.
//
// Each scan: grey luminance (CIE Y of linear sRGB, re-encoded with the sRGB curve), a small blur
// (a print seen through a flatbed scanner), faded tones (lifted blacks, dulled whites, lower contrast),
// seeded grain stronger in the mid-tones, a mild vignette, then a print tone (none, sepia, selenium,
// cyanotype); for the damaged prints, dust, hairs and scratches before the tone. A data-making script, so
// it uses sharp directly.
import { mkdirSync, readdirSync, renameSync, existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import sharp from 'sharp';

const here = dirname(fileURLToPath(import.meta.url));
const ORIGINALS = join(here, 'originals');
const SCANS = join(here, 'scans');
const ORIGINAL_LONG_SIDE = 1600;

/**
 * The album. `source` is the file name gather-photos.sh gives the photo; `extract` the part of it used,
 * where the file shows more than the photo (left, top, width, height in pixels); `tone` the print tone;
 * `black`/`white` where the faded print's darkest and lightest greys sit (0-1); `gamma` > 1 darkens
 * the mid-tones; `grain` the noise standard deviation in the mid-tones (0-1 scale); `blur` the
 * Gaussian sigma in pixels; `vignette` how much the corners darken; `out` jpeg (8-bit) or tiff16.
 */
const ALBUM = [
  {
    id: 'wrenfold-01-hill-pasture',
    source: 'lomiri-wallpapers-16.04--aitzgorri_by_Aitzol_Berasategi.jpg',
    tone: 'sepia',
    black: 0.1,
    white: 0.9,
    gamma: 1.05,
    grain: 0.035,
    blur: 1.0,
    vignette: 0.25,
    seed: 101,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-02-spaniels',
    source: 'lomiri-wallpapers-16.04--friends_by_Aitzol_Berasategi.jpg',
    tone: 'warm',
    black: 0.07,
    white: 0.92,
    gamma: 1.0,
    grain: 0.03,
    blur: 0.9,
    vignette: 0.2,
    seed: 202,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-03-new-calf',
    source: 'gcompris-qt-data--erase-calf.webp',
    tone: 'none',
    black: 0.06,
    white: 0.93,
    gamma: 1.0,
    grain: 0.03,
    blur: 0.8,
    vignette: 0.15,
    seed: 303,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-04-hill-pony',
    source: 'gcompris-qt-data--erase-horse.webp',
    tone: 'selenium',
    black: 0.05,
    white: 0.9,
    gamma: 1.1,
    grain: 0.03,
    blur: 0.8,
    vignette: 0.2,
    seed: 404,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-05-billy-goat',
    source: 'gcompris-qt-data--erase-goat.webp',
    tone: 'cyanotype',
    black: 0.08,
    white: 0.95,
    gamma: 0.95,
    grain: 0.025,
    blur: 1.1,
    vignette: 0.15,
    seed: 505,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-06-gosling',
    source: 'gcompris-qt-data--erase-gosling.webp',
    tone: 'none',
    black: 0.09,
    white: 0.9,
    gamma: 1.0,
    grain: 0.03,
    blur: 0.7,
    vignette: 0.2,
    seed: 606,
    out: 'tiff16',
    longSide: 1200,
  },
  {
    id: 'wrenfold-07-orchard-clocks',
    source: 'lomiri-wallpapers-16.04--seeding_by_Clements_Engelhardt.jpg',
    tone: 'sepia',
    black: 0.13,
    white: 0.86,
    gamma: 1.0,
    grain: 0.04,
    blur: 1.2,
    vignette: 0.3,
    seed: 707,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-08-ferry-couple',
    source: 'fotoxx-common--vignette2.jpg',
    tone: 'warm',
    black: 0.06,
    white: 0.94,
    gamma: 1.0,
    grain: 0.02,
    blur: 0.4,
    vignette: 0,
    seed: 808,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-09-cousin-ada',
    source: 'fotoxx-common--denoise.jpg',
    extract: { left: 432, top: 306, width: 229, height: 263 },
    tone: 'none',
    black: 0.07,
    white: 0.92,
    gamma: 1.0,
    grain: 0.025,
    blur: 0.4,
    vignette: 0.1,
    seed: 909,
    out: 'jpeg',
  },
  // Damaged prints for `restore --repair`: the same photographs as 03 and 01, made again with dust, hairs
  // and scratches drawn by kinhue's own damage generator (src/repair/damage.ts; needs dist/, built by npm ci).
  {
    id: 'wrenfold-10-new-calf-dusty',
    original: 'wrenfold-03-new-calf',
    damage: { seed: 1010, perMegapixel: 45 },
    tone: 'none',
    black: 0.06,
    white: 0.93,
    gamma: 1.0,
    grain: 0.03,
    blur: 0.8,
    vignette: 0.15,
    seed: 1001,
    out: 'jpeg',
  },
  {
    id: 'wrenfold-11-hill-pasture-scratched',
    original: 'wrenfold-01-hill-pasture',
    damage: { seed: 1111, perMegapixel: 30 },
    tone: 'sepia',
    black: 0.1,
    white: 0.9,
    gamma: 1.05,
    grain: 0.035,
    blur: 1.0,
    vignette: 0.25,
    seed: 1101,
    out: 'jpeg',
  },
];

/**
 * Print tones: the colour a black, a mid-grey and a white map to (sRGB 0-1); common practice
 * approximations of the look of toned silver prints and cyanotypes, not measured values.
 */
const TONES = {
  sepia: [
    [0.16, 0.1, 0.06],
    [0.6, 0.47, 0.33],
    [0.98, 0.93, 0.82],
  ],
  warm: [
    [0.08, 0.07, 0.06],
    [0.53, 0.5, 0.45],
    [0.97, 0.95, 0.9],
  ],
  selenium: [
    [0.14, 0.09, 0.12],
    [0.52, 0.46, 0.47],
    [0.96, 0.94, 0.92],
  ],
  cyanotype: [
    [0.05, 0.13, 0.3],
    [0.3, 0.5, 0.7],
    [0.9, 0.95, 0.98],
  ],
};

/** Seeded uniform generator (mulberry32, a common-practice 32-bit PRNG). */
function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Separable Gaussian blur of one float plane (edges clamped), radius 3 sigma. */
function gaussianBlur(src, w, h, sigma) {
  const r = Math.max(1, Math.ceil(3 * sigma));
  const k = new Float32Array(2 * r + 1);
  let sum = 0;
  for (let i = -r; i <= r; i++) sum += k[i + r] = Math.exp(-(i * i) / (2 * sigma * sigma));
  for (let i = 0; i < k.length; i++) k[i] /= sum;
  const tmp = new Float32Array(w * h);
  const out = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    const row = y * w;
    for (let x = 0; x < w; x++) {
      let acc = 0;
      for (let i = -r; i <= r; i++) acc += k[i + r] * src[row + Math.min(w - 1, Math.max(0, x + i))];
      tmp[row + x] = acc;
    }
  }
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      let acc = 0;
      for (let i = -r; i <= r; i++) acc += k[i + r] * tmp[Math.min(h - 1, Math.max(0, y + i)) * w + x];
      out[y * w + x] = acc;
    }
  }
  return out;
}

const toLinear = (v) => (v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4); // IEC 61966-2-1
const toSrgb = (v) => (v <= 0.0031308 ? 12.92 * v : 1.055 * v ** (1 / 2.4) - 0.055);

async function writeAtomic(pipeline, file) {
  const tmp = `${file}.tmp`;
  await pipeline.toFile(tmp);
  renameSync(tmp, file);
}

/** Colour original: long side 1600, sRGB JPEG, no metadata. */
async function makeOriginal(entry, fromDir) {
  const src = join(fromDir, entry.source);
  if (!existsSync(src)) throw new Error(`${src} is missing; run models/gather-photos.sh --demo ${fromDir} first`);
  const out = join(ORIGINALS, `${entry.id}.jpg`);
  await writeAtomic(
    (entry.extract ? sharp(src).rotate().extract(entry.extract) : sharp(src).rotate())
      .resize(ORIGINAL_LONG_SIDE, ORIGINAL_LONG_SIDE, { fit: 'inside', withoutEnlargement: true })
      .toColourspace('srgb')
      .jpeg({ quality: 88, chromaSubsampling: '4:4:4' }),
    out,
  );
}

async function makeScan(entry) {
  const orig = join(ORIGINALS, `${entry.original ?? entry.id}.jpg`);
  const meta = await sharp(orig).metadata();
  const long = entry.longSide ?? Math.max(meta.width, meta.height);
  const { data, info } = await sharp(orig).resize(long, long, { fit: 'inside' }).removeAlpha().raw().toBuffer({ resolveWithObject: true });
  const { width: w, height: h } = info;
  const n = w * h;

  // 1. grey: CIE Y from linear sRGB (IEC 61966-2-1 primaries), back to the sRGB curve
  const grey = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const y = 0.2126 * toLinear(data[3 * i] / 255) + 0.7152 * toLinear(data[3 * i + 1] / 255) + 0.0722 * toLinear(data[3 * i + 2] / 255);
    grey[i] = toSrgb(y);
  }
  // 2. soft: a small Gaussian blur
  const g = gaussianBlur(grey, w, h, entry.blur);

  // 3. grain field: seeded Gaussian noise, slightly clumped by a small blur
  const rand = rng(entry.seed);
  const noise = new Float32Array(n);
  for (let i = 0; i < n; i += 2) {
    const u = Math.max(rand(), 1e-12);
    const r = Math.sqrt(-2 * Math.log(u));
    const t = 2 * Math.PI * rand();
    noise[i] = r * Math.cos(t);
    if (i + 1 < n) noise[i + 1] = r * Math.sin(t);
  }
  const grain = gaussianBlur(noise, w, h, 0.5);
  let gs = 0;
  for (let i = 0; i < n; i++) gs += grain[i] * grain[i];
  const grainNorm = 1 / Math.sqrt(gs / n); // back to unit deviation after the blur

  // 4. fade, grain, vignette: one value per pixel, 0-1
  const v = new Float32Array(n);
  const cx = (w - 1) / 2;
  const cy = (h - 1) / 2;
  const rmax = Math.hypot(cx, cy);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      let t = Math.min(1, Math.max(0, g[i])) ** entry.gamma;
      t = entry.black + (entry.white - entry.black) * t;
      t += entry.grain * grainNorm * grain[i] * 4 * t * (1 - t); // film grain is strongest in the mid-tones
      const r = Math.hypot(x - cx, y - cy) / rmax;
      t *= 1 - entry.vignette * r ** 2.5;
      v[i] = Math.min(1, Math.max(0, t));
    }
  }
  // 5. damage: on the print's grey (scaled to 0-100, as the generator's L* plane), before the print tone.
  if (entry.damage) {
    const { drawDamage } = await import('../dist/repair/index.js');
    const { Random } = await import('../dist/training/index.js');
    const plane = Float32Array.from(v, (t) => 100 * t);
    const damaged = drawDamage(plane, w, h, new Random(entry.damage.seed), { perMegapixel: entry.damage.perMegapixel, grain: 0 }).L;
    for (let i = 0; i < n; i++) v[i] = Math.min(1, Math.max(0, damaged[i] / 100));
  }

  mkdirSync(SCANS, { recursive: true });
  if (entry.out === 'tiff16') {
    const u16 = new Uint16Array(n);
    for (let i = 0; i < n; i++) u16[i] = Math.round(v[i] * 65535);
    await writeAtomic(
      sharp(u16, { raw: { width: w, height: h, channels: 1 } })
        .toColourspace('grey16')
        .tiff({ compression: 'deflate', predictor: 'horizontal' }),
      join(SCANS, `${entry.id}.tif`),
    );
    return;
  }
  if (entry.tone === 'none') {
    const u8 = new Uint8Array(n);
    for (let i = 0; i < n; i++) u8[i] = Math.round(v[i] * 255);
    await writeAtomic(
      sharp(Buffer.from(u8.buffer), { raw: { width: w, height: h, channels: 1 } })
        .toColourspace('b-w')
        .jpeg({ quality: 88 }),
      join(SCANS, `${entry.id}.jpg`),
    );
    return;
  }
  const [dark, mid, light] = TONES[entry.tone];
  const rgb = new Uint8Array(3 * n);
  for (let i = 0; i < n; i++) {
    const t = v[i];
    for (let c = 0; c < 3; c++) {
      // piecewise-linear through the tone's black, mid-grey and white
      const val = t < 0.5 ? dark[c] + (mid[c] - dark[c]) * (t / 0.5) : mid[c] + (light[c] - mid[c]) * ((t - 0.5) / 0.5);
      rgb[3 * i + c] = Math.round(Math.min(1, Math.max(0, val)) * 255);
    }
  }
  await writeAtomic(
    sharp(Buffer.from(rgb.buffer), { raw: { width: w, height: h, channels: 3 } }).jpeg({ quality: 88 }),
    join(SCANS, `${entry.id}.jpg`),
  );
}

async function main() {
  const args = process.argv.slice(2);
  const at = args.indexOf('--from');
  const fromDir = at >= 0 ? args[at + 1] : undefined;
  if (at >= 0 && !fromDir) throw new Error('--from needs a folder (the one given to gather-photos.sh --demo)');
  mkdirSync(ORIGINALS, { recursive: true });
  for (const entry of ALBUM) {
    if (fromDir && !entry.original) await makeOriginal(entry, fromDir);
    await makeScan(entry);
    console.log(`${entry.id}: ${entry.tone}${entry.out === 'tiff16' ? ', 16-bit TIFF' : ''}`);
  }
  const stray = readdirSync(SCANS).filter((f) => !ALBUM.some((e) => f.startsWith(`${e.id}.`)));
  if (stray.length) console.log(`not in the album (left alone): ${stray.join(', ')}`);
}

main().catch((e) => {
  console.error(`make-scans: ${e.message}`);
  process.exit(1);
});

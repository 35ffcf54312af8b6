import { describe, expect, it } from 'vitest';
import { workingLab } from '../src/batch/working-lab.js';
import { areaMean, downscaleToFloatRgb, resizePlane, sampleCrop, srgbToLab, type Samples } from '../src/colour/index.js';
import { random } from './helpers/random.js';

describe('resampling', () => {
  it('area-averages a 4 x 4 image to 2 x 2 (each output the mean of its 2 x 2 block, by definition)', () => {
    const data = new Uint8Array(16 * 3);
    for (let i = 0; i < 16; i++) data.set([i * 10, 255 - i * 10, 100], i * 3);
    const out = downscaleToFloatRgb({ width: 4, height: 4, channels: 3, depth: 8, data }, 2);
    expect(out.width).toBe(2);
    expect(out.height).toBe(2);
    // Top-left block holds pixels 0, 1, 4, 5: red mean (0 + 10 + 40 + 50) / 4 = 25.
    expect(out.data[0]).toBeCloseTo(25 / 255, 6);
    expect(out.data[1]).toBeCloseTo((255 * 4 - 100) / 4 / 255, 6);
    // Bottom-right block: pixels 10, 11, 14, 15 -> red (100 + 110 + 140 + 150) / 4 = 125.
    expect(out.data[9]).toBeCloseTo(125 / 255, 6);
  });

  it('area-averages at ratios that do not divide, up and down, every layout: each output the mean of the source pixels x, y with floor(x * w / W), floor(y * h / H) on it (by definition)', () => {
    const rnd = random(3);
    for (const [W, H, channels, depth, w, h] of [
      [37, 23, 3, 8, 5, 4],
      [37, 23, 4, 16, 9, 23],
      [10, 7, 1, 8, 3, 2],
      [10, 7, 2, 16, 4, 7],
      [5, 3, 3, 8, 11, 7],
    ] as const) {
      const max = depth === 16 ? 65535 : 255;
      const data = (depth === 16 ? new Uint16Array(W * H * channels) : new Uint8Array(W * H * channels)).map(() => rnd() * (max + 1));
      const px: Samples = { width: W, height: H, channels, depth, data };
      const c = channels >= 3 ? 3 : 1;
      const sums = new Float64Array(w * h * c);
      const counts = new Float64Array(w * h);
      for (let y = 0; y < H; y++) {
        for (let x = 0; x < W; x++) {
          const cell = Math.min(h - 1, Math.floor((y * h) / H)) * w + Math.min(w - 1, Math.floor((x * w) / W));
          counts[cell]++;
          for (let k = 0; k < c; k++) sums[cell * c + k] += data[(y * W + x) * channels + k]!;
        }
      }
      const expected = Array.from(sums, (v, i) => Math.fround(counts[Math.floor(i / c)]! ? v / counts[Math.floor(i / c)]! / max : 0));
      const got = areaMean(px, w, h);
      expect(got.channels).toBe(c);
      const worst = Math.max(...Array.from(got.data, (v, i) => Math.abs(v - expected[i]!)));
      expect(worst).toBeLessThan(1e-6);
    }
  });

  it('spreads 16-bit grey to three equal channels', () => {
    const data = new Uint16Array([0, 65535, 65535, 0]);
    const out = downscaleToFloatRgb({ width: 2, height: 2, channels: 1, depth: 16, data }, 1);
    expect(Array.from(out.data)).toEqual([0.5, 0.5, 0.5]);
  });

  it('samples crops exactly on a linear ramp (bilinear interpolation is exact for linear data)', () => {
    const w = 40;
    const h = 30;
    const plane = new Float32Array(w * h);
    for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) plane[y * w + x] = x + 100 * y;
    const out = new Float32Array(64);
    sampleCrop(plane, w, h, { x: 3, y: 5, side: 8, flip: false }, 8, out, 0);
    expect(out[0]).toBe(3 + 500);
    expect(out[7 * 8 + 7]).toBe(10 + 1200);
    sampleCrop(plane, w, h, { x: 3, y: 5, side: 8, flip: true }, 8, out, 0);
    expect(out[0]).toBe(10 + 500);
    // Zoomed out by 2: output (ox, oy) samples source (3 + 2 ox + 0.5, 5 + 2 oy + 0.5).
    sampleCrop(plane, w, h, { x: 3, y: 5, side: 16, flip: false }, 8, out, 0);
    for (const [ox, oy] of [
      [0, 0],
      [5, 2],
      [7, 7],
    ] as const) {
      expect(out[oy * 8 + ox]).toBeCloseTo(3 + 2 * ox + 0.5 + 100 * (5 + 2 * oy + 0.5), 3);
    }
  });

  it('upsamples bilinearly: constants stay constant, ramps stay ramps away from the border', () => {
    const flat = resizePlane(new Float32Array(12).fill(7), 4, 3, 16, 12);
    expect(flat.every((v) => v === 7)).toBe(true);
    const ramp = new Float32Array([0, 4, 8, 12]);
    const up = resizePlane(ramp, 4, 1, 16, 1);
    // Output centre x maps to source (x + 0.5) / 4 - 0.5; values there are 4 times that.
    for (let x = 2; x < 14; x++) expect(up[x]).toBeCloseTo(4 * ((x + 0.5) / 4 - 0.5), 5);
  });
});

describe('one footprint for restore and training', () => {
  it("restore's working-size scan and a training photo shrink alike, at ratios that do not divide", () => {
    const next = random(14);
    for (const [w, h, side] of [
      [5, 3, 2],
      [101, 67, 40],
      [640, 427, 512],
    ] as const) {
      const data = Uint8Array.from({ length: w * h * 3 }, () => Math.floor(next() * 256));
      const px = { width: w, height: h, channels: 3 as const, depth: 8 as const, data };
      const photo = downscaleToFloatRgb(px, side);
      const scan = workingLab(px, photo.width, photo.height);
      // Bit for bit: the model sees at restore exactly what it learnt from.
      expect(Array.from(srgbToLab(photo.data, 3).L)).toEqual(Array.from(scan.L));
    }
  });
});

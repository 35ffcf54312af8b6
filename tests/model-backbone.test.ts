import { beforeAll, describe, expect, it } from 'vitest';
import {
  BACKBONE_CHANNELS,
  BACKBONE_GRID,
  backboneFeatures,
  DEFAULT_MODEL_DIR,
  initBackend,
  loadBackbone,
  placeFeatures,
  type Backbone,
} from '../src/model/index.js';
import { createNetwork } from '../src/model/network.js';
import { predict } from '../src/model/predict.js';
import { random } from './helpers/random.js';

// The borrowed backbone (src/model/backbone.ts) and the network that reads it (src/model/network.ts),
// checked on synthetic data: placement of feature maps follows from bilinear interpolation with pixel
// centres aligned (common practice); the scene vector must reach every pixel (Iizuka et al. 2016).

let backbone: Backbone;

beforeAll(async () => {
  await initBackend();
  backbone = await loadBackbone(DEFAULT_MODEL_DIR);
}, 60_000);

describe('placing feature maps under a picture or a crop', () => {
  const side = 4;
  const channels = 2;
  // Channel 0 holds the cell's column, channel 1 its row.
  const map = new Float32Array(side * side * channels);
  for (let y = 0; y < side; y++) for (let x = 0; x < side; x++) map.set([x, y], (y * side + x) * channels);

  it('reproduces the map on a grid of its own size over the whole picture', () => {
    const out = new Float32Array(map.length);
    placeFeatures(map, side, channels, { x: 0, y: 0, width: 1, height: 1 }, side, side, out, 0);
    expect(Array.from(out)).toEqual(Array.from(map));
  });

  it('interpolates the right half of the picture onto a grid, written at an offset', () => {
    const out = new Float32Array(3 + 4 * channels);
    placeFeatures(map, side, channels, { x: 0.5, y: 0, width: 0.5, height: 1 }, 2, 2, out, 3);
    // Grid cell 0 of 2 across the right half sits at 0.625 of the picture: map column 0.625 * 4 - 0.5 = 2.
    expect(Array.from(out.subarray(3))).toEqual([2, 0.5, 3, 0.5, 2, 2.5, 3, 2.5]);
  });
});

describe('the backbone', () => {
  it('gives maps at 1/8 and 1/16 of its input and one scene vector, the same for the same picture', () => {
    const next = random(5);
    const L = new Float32Array(96 * 64).map(() => 100 * next());
    const f = backboneFeatures(backbone, L, 96, 64);
    expect(f.local8.length).toBe(BACKBONE_GRID.local8 ** 2 * BACKBONE_CHANNELS.local8);
    expect(f.local16.length).toBe(BACKBONE_GRID.local16 ** 2 * BACKBONE_CHANNELS.local16);
    expect(f.global.length).toBe(BACKBONE_CHANNELS.global);
    expect(Array.from(backboneFeatures(backbone, L, 96, 64).global)).toEqual(Array.from(f.global));
    // Mirroring the picture changes the maps (it is an input, not a label).
    expect(Array.from(backboneFeatures(backbone, L, 96, 64, true).local8)).not.toEqual(Array.from(f.local8));
  }, 60_000);

  it("lets content far away change a pixel's colour through the scene vector, which L* alone cannot", () => {
    const W = 512;
    const H = 64;
    const next = random(9);
    const near = new Float32Array(W * H).map(() => 40 + 20 * next());
    const far = Float32Array.from(near);
    // Change only the right quarter of the picture.
    for (let y = 0; y < H; y++) for (let x = (3 * W) / 4; x < W; x++) far[y * W + x] = 100 * next();
    const leftCorner = (p: { a: Float32Array; width: number }) =>
      Array.from({ length: 8 }, (_, y) => Array.from(p.a.subarray(y * p.width, y * p.width + 8))).flat();

    const plain = createNetwork({ width: 4, seed: 2 });
    const opts = { decoding: 'annealed-mean' as const, temperature: 1 };
    expect(leftCorner(predict(plain, far, W, H, opts))).toEqual(leftCorner(predict(plain, near, W, H, opts)));
    plain.dispose();

    const reading = createNetwork({ width: 4, seed: 2, backbone: true });
    const withBackbone = { ...opts, backbone };
    const a = leftCorner(predict(reading, near, W, H, withBackbone));
    const b = leftCorner(predict(reading, far, W, H, withBackbone));
    expect(Math.max(...a.map((v, i) => Math.abs(v - b[i]!)))).toBeGreaterThan(1e-4);
    reading.dispose();
  }, 60_000);
});

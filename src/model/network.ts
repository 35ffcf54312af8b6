/**
 * kinhue's encoder-decoder: L* in, logits over the a*b* bins out at a quarter of the resolution.
 * U-Net-style: four stride-2 stages down to 1/16, two upsampling stages back to 1/4 with skip
 * connections from the encoder; plain 3 x 3 convolutions and ReLU, no dilation (TensorFlow.js has
 * no gradient for dilated convolutions) and no batch normalisation (small fine-tuning batches).
 */
import * as tf from '@tensorflow/tfjs';
import { BACKBONE_CHANNELS } from './backbone.js';
import { abBins } from './bins.js';

export interface NetworkOptions {
  /** Number of a*b* bins (Q), the output channels. Default: abBins(10).count. */
  bins?: number;
  /** Channels of the first stage; later stages use 2x, 4x, 8x. Default 16. */
  width?: number;
  /** Seed for the weight initialisers, for reproducible networks. */
  seed?: number;
  /**
   * Read the borrowed backbone's features beside L* (backbone.ts): its maps at 1/8 and 1/16, and the
   * picture's scene vector spread over the 1/16 grid, fused into the decoder (Iizuka et al. 2016).
   */
  backbone?: boolean;
}

/** Names of the network's inputs when it reads the backbone's features. */
export const NETWORK_INPUTS = ['lightness', 'features8', 'features16', 'scene'] as const;

/** Input and output sizes must be multiples of this (four stride-2 stages). */
export const NETWORK_MULTIPLE = 16;
/** The output is this many times smaller than the input on each side. */
export const OUTPUT_STRIDE = 4;
/** Prefix of every encoder layer name (see freezeEncoder). */
const ENCODER = 'enc';

/** Scales L* (0-100) to the network's input range, [-0.5, 0.5]. */
export function toNetworkInput(L: Float32Array, out = new Float32Array(L.length)): Float32Array {
  for (let i = 0; i < L.length; i++) out[i] = L[i] / 100 - 0.5;
  return out;
}

/**
 * Builds an untrained network with He-initialised weights.
 * @example
 * const net = createNetwork({ bins: abBins().count });
 * net.predict(tf.zeros([1, 128, 128, 1])); // shape [1, 32, 32, Q]
 */
export function createNetwork(options: NetworkOptions = {}): tf.LayersModel {
  const q = options.bins ?? abBins().count;
  const c = options.width ?? 16;
  let seed = options.seed ?? 1;
  const init = () => tf.initializers.heNormal({ seed: seed++ });
  const conv = (name: string, filters: number, stride = 1, kernel = 3) =>
    tf.layers.conv2d({
      name,
      filters,
      kernelSize: kernel,
      strides: stride,
      padding: 'same',
      activation: 'relu',
      kernelInitializer: init(),
    });

  const input = tf.input({ shape: [null, null, 1], name: NETWORK_INPUTS[0] });
  if (options.backbone) return withBackbone(input, q, c, conv, () => seed++);
  // Encoder: 1/2, 1/4, 1/8, 1/16.
  // The first layer strides at once: a full-resolution layer costs more to train than it gives
  // a network whose output is at a quarter of the resolution.
  let x = apply(conv(`${ENCODER}1`, c, 2), input);
  x = apply(conv(`${ENCODER}2a`, 2 * c), x);
  x = apply(conv(`${ENCODER}2b`, 2 * c, 2), x);
  const skip4 = apply(conv(`${ENCODER}3a`, 4 * c), x);
  x = apply(conv(`${ENCODER}3b`, 4 * c, 2), skip4);
  const skip8 = apply(conv(`${ENCODER}4a`, 8 * c), x);
  x = apply(conv(`${ENCODER}4b`, 8 * c, 2), skip8);
  x = apply(conv(`${ENCODER}5a`, 8 * c), x);
  x = apply(conv(`${ENCODER}5b`, 8 * c), x);
  // Decoder: back to 1/8, then 1/4, joining the encoder's features of the same size.
  x = apply(conv('dec1', 4 * c), join('dec1_join', [up('dec1_up', x), skip8]));
  x = apply(conv('dec2', 3 * c), join('dec2_join', [up('dec2_up', x), skip4]));
  const logits = apply(
    tf.layers.conv2d({ name: 'logits', filters: q, kernelSize: 1, kernelInitializer: tf.initializers.glorotUniform({ seed: seed++ }) }),
    x,
  );
  return tf.model({ inputs: input, outputs: logits, name: 'kinhue' });
}

type Conv = (name: string, filters: number, stride?: number, kernel?: number) => tf.layers.Layer;

const apply = (layer: tf.layers.Layer, x: tf.SymbolicTensor | tf.SymbolicTensor[]) => layer.apply(x) as tf.SymbolicTensor;
const join = (name: string, parts: tf.SymbolicTensor[]) => apply(tf.layers.concatenate({ name }), parts);
const up = (name: string, x: tf.SymbolicTensor) => apply(tf.layers.upSampling2d({ name, size: [2, 2] }), x);

/**
 * The network that reads the backbone's features beside L*. The backbone already knows what things are,
 * so the L* path is slim: it gives edges and texture at 1/4 and 1/8. What the detector sees at 1/16 and
 * the scene vector spread over the 1/16 grid are fused there (after Iizuka et al. 2016), its 1/8 map
 * joins on the way up, and the output stays at 1/4.
 */
function withBackbone(input: tf.SymbolicTensor, q: number, c: number, conv: Conv, nextSeed: () => number): tf.LayersModel {
  const features8 = tf.input({ shape: [null, null, BACKBONE_CHANNELS.local8], name: NETWORK_INPUTS[1] });
  const features16 = tf.input({ shape: [null, null, BACKBONE_CHANNELS.local16], name: NETWORK_INPUTS[2] });
  const scene = tf.input({ shape: [null, null, BACKBONE_CHANNELS.global], name: NETWORK_INPUTS[3] });
  let x = apply(conv(`${ENCODER}1`, c, 2), input);
  const skip4 = apply(conv(`${ENCODER}2`, 2 * c, 2), x);
  const skip8 = apply(conv(`${ENCODER}3`, 4 * c, 2), skip4);
  x = apply(conv(`${ENCODER}4`, 4 * c, 2), skip8);
  const local16 = apply(conv('fuse16_local', 4 * c, 1, 1), features16);
  const whole = apply(conv('fuse16_scene', 4 * c, 1, 1), scene);
  x = apply(conv('fuse16', 8 * c), join('fuse16_join', [x, local16, whole]));
  x = apply(conv('fuse16b', 8 * c), x);
  const local8 = apply(conv('fuse8_local', 4 * c, 1, 1), features8);
  x = apply(conv('dec1', 4 * c), join('dec1_join', [up('dec1_up', x), skip8, local8]));
  x = apply(conv('dec2', 3 * c), join('dec2_join', [up('dec2_up', x), skip4]));
  const logits = apply(
    tf.layers.conv2d({ name: 'logits', filters: q, kernelSize: 1, kernelInitializer: tf.initializers.glorotUniform({ seed: nextSeed() }) }),
    x,
  );
  return tf.model({ inputs: [input, features8, features16, scene], outputs: logits, name: 'kinhue' });
}

/**
 * Names of the encoder's layers: the part kept fixed when tuning on a small archive.
 * @example
 * encoderLayerNames(net); // ['enc1a', 'enc1b', ...]
 */
export function encoderLayerNames(model: tf.LayersModel): string[] {
  return model.layers.filter((l) => l.name.startsWith(ENCODER)).map((l) => l.name);
}

/**
 * Marks the encoder's layers as not trainable (or trainable again with `frozen = false`).
 * Create the trainer after this call: it optimises the weights trainable at creation.
 * @example
 * freezeEncoder(net);
 * const trainer = createTrainer(net, { learningRate: 1e-4, classWeights });
 */
export function freezeEncoder(model: tf.LayersModel, frozen = true): void {
  for (const name of encoderLayerNames(model)) model.getLayer(name).trainable = !frozen;
}

/** Number of weights in the network. */
export function parameterCount(model: tf.LayersModel): number {
  return model.countParams();
}

/**
 * Multiply-adds x 2 of one forward pass on a width x height image (convolutions only; the rest is
 * small). Counted from the layers' kernel shapes and output sizes.
 * @example
 * networkFlops(net, 512, 384) / 1e9; // GFLOPs per 512 x 384 image
 */
export function networkFlops(model: tf.LayersModel, width: number, height: number): number {
  let flops = 0;
  const probeSize = 64;
  for (const layer of model.layers) {
    if (layer.getClassName() !== 'Conv2D') continue;
    const [kh, kw, ci, co] = layer.getWeights()[0].shape as [number, number, number, number];
    const stride = layerScale(model, layer.name, probeSize);
    const ow = Math.ceil(width / stride);
    const oh = Math.ceil(height / stride);
    flops += 2 * ow * oh * kh * kw * ci * co;
  }
  return flops;
}

const scaleCache = new WeakMap<tf.LayersModel, Map<string, number>>();

/** How many times smaller than the input a layer's output is, from one probe pass. */
function layerScale(model: tf.LayersModel, name: string, probe: number): number {
  let scales = scaleCache.get(model);
  if (!scales) {
    const convs = model.layers.filter((l) => l.getClassName() === 'Conv2D');
    const probeModel = tf.model({ inputs: model.inputs, outputs: convs.map((l) => l.output as tf.SymbolicTensor) });
    const outs = tf.tidy(() => {
      const r = probeModel.predict(
        model.inputs.map((input) => {
          const channels = input.shape.at(-1) as number;
          const side = input.name.startsWith(NETWORK_INPUTS[0]) ? probe : input.name.startsWith(NETWORK_INPUTS[1]) ? probe / 8 : probe / 16;
          return tf.zeros([1, side, side, channels]);
        }),
      );
      return (Array.isArray(r) ? r : [r]).map((t) => t.shape[1] as number);
    });
    scales = new Map(convs.map((l, i) => [l.name, probe / outs[i]]));
    scaleCache.set(model, scales);
  }
  return scales.get(name) ?? 1;
}

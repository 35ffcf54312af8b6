/**
 * The repair network: a small denoising autoencoder on L* (after Vincent et al. 2008) in the shape of
 * a two-level U-Net. From a damaged patch it predicts, per pixel, whether it is damage (a logit) and
 * the undamaged L* (as a correction added to the input), so the mask and the fill come from one pass.
 * Input: L* / 100 - 0.5; sizes that are multiples of 4.
 */
import * as tf from '@tensorflow/tfjs';

/** Input sizes must be multiples of this (two halvings). */
export const REPAIR_MULTIPLE = 4;

/**
 * Builds an untrained repair network with He-initialised weights.
 * @example
 *   const net = createRepairNetwork();
 *   net.predict(tf.zeros([1, 64, 64, 1])); // shape [1, 64, 64, 2]: damage logit, L* correction / 100
 */
export function createRepairNetwork(seed = 1): tf.LayersModel {
  let next = seed;
  const conv = (name: string, filters: number, stride = 1) =>
    tf.layers.conv2d({
      name,
      filters,
      kernelSize: 3,
      strides: stride,
      padding: 'same',
      activation: 'relu',
      kernelInitializer: tf.initializers.heNormal({ seed: next++ }),
    });
  const apply = (layer: tf.layers.Layer, x: tf.SymbolicTensor | tf.SymbolicTensor[]) => layer.apply(x) as tf.SymbolicTensor;
  const up = (name: string, x: tf.SymbolicTensor) => apply(tf.layers.upSampling2d({ name, size: [2, 2] }), x);
  const join = (name: string, parts: tf.SymbolicTensor[]) => apply(tf.layers.concatenate({ name }), parts);

  const input = tf.input({ shape: [null, null, 1], name: 'lightness' });
  const full = apply(conv('enc1', 12), input);
  const half = apply(conv('enc2', 16, 2), full);
  let x = apply(conv('enc3a', 24, 2), half);
  x = apply(conv('enc3b', 24), x);
  x = apply(conv('dec2', 16), join('dec2_join', [up('dec2_up', x), half]));
  x = apply(conv('dec1', 12), join('dec1_join', [up('dec1_up', x), full, input]));
  const out = apply(
    tf.layers.conv2d({ name: 'repair', filters: 2, kernelSize: 1, kernelInitializer: tf.initializers.glorotUniform({ seed: next++ }) }),
    x,
  );
  return tf.model({ inputs: input, outputs: out, name: 'kinhue-repair' });
}

/** L* to the network's input scale. */
export function toRepairInput(L: number): number {
  return L / 100 - 0.5;
}

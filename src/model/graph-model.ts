/**
 * A TensorFlow.js graph model (the borrowed backbone, the face finder) from its two files' bytes, as
 * published: `<name>.json` (topology and weights manifest) and `<name>.bin` (the weights).
 */
import * as tf from '@tensorflow/tfjs';

/**
 * Builds the graph model in memory; the caller has read (and checked) the bytes.
 * @example
 * const graph = await graphModelFrom(await readFile('backbone.json'), await readFile('backbone.bin'));
 */
export async function graphModelFrom(topology: Uint8Array, weights: Uint8Array): Promise<tf.GraphModel> {
  const json = JSON.parse(Buffer.from(topology).toString('utf8')) as {
    modelTopology: object;
    weightsManifest: { weights: tf.io.WeightsManifestEntry[] }[];
  };
  const weightData = weights.buffer.slice(weights.byteOffset, weights.byteOffset + weights.byteLength) as ArrayBuffer;
  return tf.loadGraphModel(
    tf.io.fromMemory({ modelTopology: json.modelTopology, weightSpecs: json.weightsManifest.flatMap((g) => g.weights), weightData }),
  );
}

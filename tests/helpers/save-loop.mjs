// A child process for tests/model-folder: saves a small real network into a model folder again and again,
// alternating two sets of weights (temperature 0.3 with one, 0.5 with the other), until it is killed.
// Built JavaScript (dist/), as for worker threads: the test kills a real process.
import * as tf from '@tensorflow/tfjs';
import { abBins, initBackend, saveModel } from '../../dist/model/index.js';

const dir = process.argv[2];
await initBackend();
const bins = abBins();
const network = (seed) => {
  const input = tf.input({ shape: [null, null, 1] });
  const output = tf.layers
    .conv2d({ filters: bins.count, kernelSize: 1, kernelInitializer: tf.initializers.randomNormal({ seed }) })
    .apply(input);
  return tf.model({ inputs: input, outputs: output });
};
const pair = [network(1), network(2)];
// Ready once a save has finished: the test's kill then lands in a later one.
await saveModel(pair[0], dir, { name: 'kill-test', temperature: 0.3 });
process.stdout.write('ready\n');
for (let k = 1; ; k++) await saveModel(pair[k % 2], dir, { name: 'kill-test', temperature: k % 2 ? 0.5 : 0.3 });

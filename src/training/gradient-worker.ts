/**
 * A training worker thread: starts the run's TensorFlow.js backend, builds a replica of the network
 * from its topology, then answers each shard of a batch with its loss and gradients. It never updates
 * weights itself: the run's optimiser does, and sends the values with the next shard. Loaded from
 * dist/ (built JavaScript) by the parallel trainer.
 */
import { parentPort, workerData } from 'node:worker_threads';
import * as tf from '@tensorflow/tfjs';
import { serialiseError } from '../errors.js';
import { createGradientComputer, initBackend, type GradientComputer } from '../model/index.js';
import type { FromGradientWorker, GradientWorkerInit, ToGradientWorker } from './gradient-protocol.js';

const port = parentPort;
if (!port) throw new Error('training/gradient-worker.js runs only as a worker thread');
const post = (message: FromGradientWorker, transfer: ArrayBuffer[] = []): void => port.postMessage(message, transfer);

/** The backend names TensorFlow.js reports, as initBackend's preferences. */
const PREFER = { tensorflow: 'node', wasm: 'wasm', cpu: 'cpu' } as const;

async function start(): Promise<void> {
  const init = workerData as GradientWorkerInit;
  let network: tf.LayersModel;
  let gradients: GradientComputer;
  try {
    const info = await initBackend({ prefer: PREFER[init.backend as keyof typeof PREFER] });
    if (info.name !== init.backend) {
      throw new Error(`a training worker could start only the ${info.name} backend, not the run's ${init.backend}`);
    }
    network = await tf.models.modelFromJSON({ modelTopology: init.topology } as Parameters<typeof tf.models.modelFromJSON>[0]);
    gradients = createGradientComputer(network, { classWeights: init.classWeights, names: init.names });
    post({ type: 'ready', backend: info.name });
  } catch (error) {
    post({ type: 'init-failed', error: serialiseError(error) });
    return;
  }
  const byName = new Map(network.weights.map((w) => [w.originalName, w]));
  port!.on('message', (message: ToGradientWorker) => {
    if (message.type === 'weights') {
      tf.tidy(() =>
        message.names.forEach((name, i) => {
          const weight = byName.get(name);
          if (weight) weight.write(tf.tensor(message.values[i]!, weight.shape as number[]));
        }),
      );
      return;
    }
    try {
      gradients.setValues(message.values);
      const { loss, grads } = gradients.compute(message.L, message.ab, message.n, message.h, message.w, message.borrowed);
      post(
        { type: 'gradients', id: message.id, loss, grads },
        grads.flatMap((g) => (g ? [g.buffer as ArrayBuffer] : [])),
      );
    } catch (error) {
      post({ type: 'failed', id: message.id, error: serialiseError(error) });
    }
  });
}

void start();

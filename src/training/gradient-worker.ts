/**
 * A training worker thread: starts the run's TensorFlow.js backend, builds a replica of the network
 * from its topology, then for each step cuts its shard of the batch from the shared photos and answers
 * with its loss, its gradients written to shared memory. It never updates weights itself: the run's
 * optimiser does, and writes their values to shared memory before each step. Loaded from dist/ (built
 * JavaScript) by the parallel trainer.
 */
import { parentPort, workerData } from 'node:worker_threads';
import * as tf from '@tensorflow/tfjs';
import { serialiseError } from '../errors.js';
import { createGradientComputer, initBackend, type GradientComputer } from '../model/index.js';
import { type CropBatch, cutCrops } from './crop-sampler.js';
import type { FromGradientWorker, GradientWorkerInit, ToGradientWorker } from './gradient-protocol.js';

const port = parentPort;
if (!port) throw new Error('training/gradient-worker.js runs only as a worker thread');
const post = (message: FromGradientWorker): void => port.postMessage(message);

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
  // Views of each trained weight in the shared values and gradients, in `names` order.
  const parts = (all: Float32Array): Float32Array[] => {
    let offset = 0;
    return init.names.map((name) => {
      const size = byName.get(name)!.shape.reduce((p: number, d) => p * d!, 1);
      offset += size;
      return all.subarray(offset - size, offset);
    });
  };
  const values = parts(init.values);
  const grads = parts(init.gradients);
  /** Crops cut ahead of their step, by batch number (or why they could not be cut); spent ones are kept for reuse. */
  const cut = new Map<number, CropBatch | Error>();
  let spare: CropBatch | undefined;

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
    if (message.type === 'crops') {
      try {
        cut.set(message.batch, cutCrops(init.photos, init.features, message.draws, message.size, spare));
        spare = undefined;
      } catch (error) {
        cut.set(message.batch, error instanceof Error ? error : new Error(String(error)));
      }
      return;
    }
    const batch = cut.get(message.batch);
    // Crops cut for an earlier batch that never ran are dropped (the run asked for other crops).
    for (const key of cut.keys()) if (key <= message.batch) cut.delete(key);
    try {
      if (!batch) throw new Error(`a training worker was asked for batch ${message.batch} before its crops`);
      if (batch instanceof Error) throw batch;
      gradients.setValues(values);
      const { loss, grads: computed } = gradients.compute(batch.L, batch.ab, batch.n, batch.size, batch.size, batch.borrowed);
      computed.forEach((g, i) => g && grads[i]!.set(g));
      spare = batch;
      post({ type: 'gradients', id: message.id, loss, reached: computed.map((g) => g !== null) });
    } catch (error) {
      post({ type: 'failed', id: message.id, error: serialiseError(error) });
    }
  });
}

void start();

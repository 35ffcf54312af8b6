/**
 * A restore worker thread: starts a TensorFlow.js backend, loads its own copy of the model, then
 * restores one file per message. Loaded from dist/ (built JavaScript) by the pool.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { initBackend, loadFaceFinder, loadModel, type FaceFinder, type KinhueModel } from '../model/index.js';
import { setOnnxThreads } from '../model/onnx-runtime.js';
import { restoreFile } from './stages/pipeline.js';
import { serialiseError, type FromWorker, type ToWorker, type WorkerInit } from './worker-protocol.js';

const port = parentPort;
if (!port) throw new Error('batch/worker.js runs only as a worker thread');
const post = (message: FromWorker): void => port.postMessage(message);

async function start(): Promise<void> {
  const init = workerData as WorkerInit;
  let model: KinhueModel;
  let backend: string;
  try {
    setOnnxThreads(init.onnxThreads);
    const info = await initBackend();
    backend = info.model;
    model = await loadModel(init.modelDir);
    post({ type: 'ready', backend, warning: info.warning });
  } catch (error) {
    post({ type: 'init-failed', error: serialiseError(error) });
    return;
  }
  // The face finder loads with the first scan that asks for the skin prior.
  let faceFinder: Promise<FaceFinder> | undefined;
  port!.on('message', (message: ToWorker) => {
    if (message.type !== 'job') return;
    const skin = message.job.settings.skin !== false;
    if (skin) faceFinder ??= loadFaceFinder();
    Promise.resolve(skin ? faceFinder : undefined)
      .then((finder) => restoreFile(message.job, model, { backend, faceFinder: finder }))
      .then(
        (outcome) => post({ type: 'done', id: message.id, outcome }),
        (error: unknown) => post({ type: 'failed', id: message.id, error: serialiseError(error) }),
      );
  });
}

void start();

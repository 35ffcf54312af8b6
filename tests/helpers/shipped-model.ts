import { DEFAULT_MODEL_DIR, initBackend, loadModel, type KinhueModel } from '../../src/model/index.js';

/**
 * The shipped model (models/kinhue-base), for suites that measure what restore delivers. A training run
 * may be rewriting the folder while tests run (the folder is replaced as a whole after each evaluation):
 * a load that fails is tried once more after a pause, then the error stands.
 */
export async function loadShippedModel(pauseMs = 5000): Promise<KinhueModel> {
  await initBackend();
  try {
    return await loadModel(DEFAULT_MODEL_DIR);
  } catch {
    await new Promise((done) => setTimeout(done, pauseMs));
    return loadModel(DEFAULT_MODEL_DIR);
  }
}

import { DEFAULT_MODEL_DIR, initBackend, loadModel, type KinhueModel } from '../../src/model/index.js';

/** The shipped model (models/kinhue-base), for the few broad checks of what restore delivers with it. */
export async function loadShippedModel(): Promise<KinhueModel> {
  await initBackend();
  return loadModel(DEFAULT_MODEL_DIR);
}

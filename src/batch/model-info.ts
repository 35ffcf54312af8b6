/**
 * What a run needs to know about its model before any worker starts: that it loads (so a bad folder
 * fails the run at once, with the model's own message), its name, weights hash and default temperature.
 */
import { loadModel } from '../model/index.js';

export interface ModelInfo {
  dir: string;
  name: string;
  weightsSha256: string;
  temperature: number;
  /** The working size the model was trained for. */
  workingSize: number;
}

/**
 * Loads the model once to check it, keeps its identity, and frees it.
 * @example
 *   const info = await readModelInfo('models/kinhue-base');
 */
export async function readModelInfo(dir: string): Promise<ModelInfo> {
  const model = await loadModel(dir);
  try {
    return {
      dir: model.dir,
      name: model.meta.name,
      weightsSha256: model.meta.weightsSha256,
      temperature: model.meta.temperature,
      workingSize: model.meta.workingSize,
    };
  } finally {
    model.network.dispose();
  }
}

/**
 * What a run needs to know about its model before any worker starts: its name, weights and layout
 * hashes, default decoding, temperature and working size, from its metadata file, with the weights and
 * layout checked against their hashes so a damaged folder fails the run at once. No network is built here
 * (the workers load their own), so the main thread never starts a TensorFlow.js backend.
 */
import { resolve } from 'node:path';
import { readModelFiles, type Decoding } from '../model/index.js';

export interface ModelInfo {
  dir: string;
  name: string;
  weightsSha256: string;
  /** SHA-256 of the folder's model.json (the network's layout). */
  topologySha256: string;
  decoding: Decoding;
  temperature: number;
  /** How much class rebalancing its least-CIEDE2000 decoding leaves in. */
  vividness: number;
  /** The working size the model was trained for. */
  workingSize: number;
  /** Things to tell the user, e.g. that an older folder's layout could not be checked. */
  warnings: string[];
}

/**
 * Reads and checks a model folder's identity. Throws ModelError naming the folder.
 * @example
 *   const info = await readModelInfo('models/kinhue-base');
 */
export async function readModelInfo(dir: string): Promise<ModelInfo> {
  const { meta, topologySha256, warnings } = await readModelFiles(dir);
  return {
    dir: resolve(dir),
    name: meta.name,
    weightsSha256: meta.weightsSha256,
    topologySha256,
    decoding: meta.decoding,
    temperature: meta.temperature,
    vividness: meta.vividness,
    workingSize: meta.workingSize,
    warnings,
  };
}

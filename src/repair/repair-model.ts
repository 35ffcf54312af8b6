/**
 * The repair model folder: `model.json` and `weights.bin` (TensorFlow.js layers format) and
 * `repair-model.json` (what it is, the SHA-256 of the other two, how it was trained and measured).
 * Each file is written atomically; a folder whose files do not match their hashes is refused.
 */
import { createHash } from 'node:crypto';
import { mkdir, readFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { ModelError } from '../errors.js';
import { writeFileAtomic } from '../files/index.js';

/** The shipped repair model, models/kinhue-repair in the package. */
export const DEFAULT_REPAIR_MODEL_DIR = fileURLToPath(new URL('../../models/kinhue-repair', import.meta.url));

export const REPAIR_META_FILE = 'repair-model.json';
const TOPOLOGY = 'model.json';
const WEIGHTS = 'weights.bin';

export interface RepairModelMeta {
  format: 'kinhue-repair';
  version: 1;
  name: string;
  weightsSha256: string;
  topologySha256: string;
  /** Damage probability above which a pixel is repaired. */
  threshold: number;
  /** What goes into the repaired pixels: the network's L*, or the median fill where that measured better. */
  fill: 'network' | 'median';
  /**
   * Which pixels are repaired: `network`, those the network marks near permissive top-hat candidates;
   * `confirmed`, those the classical detector marks and the network agrees are damage.
   */
  detection: 'network' | 'confirmed';
  /** How it was trained and what it measured (free-form, for the model card). */
  training: Record<string, unknown>;
}

export interface RepairModel {
  network: tf.LayersModel;
  meta: RepairModelMeta;
  dir: string;
}

/**
 * Writes a repair network and its description into `dir`.
 * @example
 *   await saveRepairModel(net, 'models/kinhue-repair', { name: 'kinhue-repair', threshold: 0.5, training: { steps: 900 } });
 */
export async function saveRepairModel(
  network: tf.LayersModel,
  dir: string,
  meta: Pick<RepairModelMeta, 'name' | 'threshold' | 'fill' | 'detection' | 'training'>,
): Promise<RepairModelMeta> {
  let artifacts: tf.io.ModelArtifacts | undefined;
  await network.save({
    save: async (a: tf.io.ModelArtifacts) => {
      artifacts = a;
      return { modelArtifactsInfo: tf.io.getModelArtifactsInfoForJSON(a) };
    },
  });
  if (!artifacts?.weightData || !artifacts.weightSpecs) throw new Error('the repair network produced nothing to save');
  const weights = new Uint8Array(tf.io.concatenateArrayBuffers([artifacts.weightData].flat()));
  const topology = JSON.stringify({
    format: 'layers-model',
    modelTopology: artifacts.modelTopology,
    weightsManifest: [{ paths: [WEIGHTS], weights: artifacts.weightSpecs }],
  });
  const full: RepairModelMeta = {
    format: 'kinhue-repair',
    version: 1,
    ...meta,
    weightsSha256: sha256(weights),
    topologySha256: sha256(topology),
  };
  await mkdir(dir, { recursive: true });
  await writeFileAtomic(join(dir, WEIGHTS), weights);
  await writeFileAtomic(join(dir, TOPOLOGY), topology);
  await writeFileAtomic(join(dir, REPAIR_META_FILE), `${JSON.stringify(full, null, 2)}\n`);
  return full;
}

/**
 * Loads a repair model folder, checking its files against their hashes. Throws ModelError (KH_BAD_MODEL).
 * @example
 *   const model = await loadRepairModel(DEFAULT_REPAIR_MODEL_DIR);
 */
export async function loadRepairModel(dir: string = DEFAULT_REPAIR_MODEL_DIR): Promise<RepairModel> {
  const abs = resolve(dir);
  const hint = 'restore the folder from where it came, or rebuild it with npm run train:repair';
  const read = (name: string) =>
    readFile(join(abs, name)).catch((cause: unknown) => {
      throw new ModelError(`the repair model has no readable ${name}`, { file: join(dir, name), hint, cause });
    });
  const [metaText, topologyText, weights] = await Promise.all([read(REPAIR_META_FILE), read(TOPOLOGY), read(WEIGHTS)]);
  let meta: RepairModelMeta;
  try {
    meta = JSON.parse(metaText.toString('utf8')) as RepairModelMeta;
  } catch (cause) {
    throw new ModelError(`${REPAIR_META_FILE} is not JSON`, { file: join(dir, REPAIR_META_FILE), hint, cause });
  }
  if (
    meta.format !== 'kinhue-repair' ||
    (meta.fill !== 'network' && meta.fill !== 'median') ||
    (meta.detection !== 'network' && meta.detection !== 'confirmed') ||
    !(meta.threshold > 0 && meta.threshold < 1)
  ) {
    throw new ModelError(`${REPAIR_META_FILE} does not describe a kinhue repair model (format, fill, detection and threshold)`, {
      file: join(dir, REPAIR_META_FILE),
      hint,
    });
  }
  if (sha256(weights) !== meta.weightsSha256 || sha256(topologyText) !== meta.topologySha256) {
    throw new ModelError(`${WEIGHTS} or ${TOPOLOGY} does not match the SHA-256 in ${REPAIR_META_FILE} (damaged or edited)`, {
      file: dir,
      hint,
    });
  }
  const topology = JSON.parse(topologyText.toString('utf8')) as {
    modelTopology: object;
    weightsManifest: { weights: tf.io.WeightsManifestEntry[] }[];
  };
  const buffer = weights.buffer.slice(weights.byteOffset, weights.byteOffset + weights.byteLength) as ArrayBuffer;
  const network = await tf.loadLayersModel({
    load: async () => ({
      modelTopology: topology.modelTopology,
      weightSpecs: topology.weightsManifest.flatMap((g) => g.weights),
      weightData: buffer,
      format: 'layers-model',
    }),
  });
  return { network, meta, dir: abs };
}

function sha256(data: Uint8Array | string): string {
  return createHash('sha256').update(data).digest('hex');
}

const shared = new Map<string, Promise<RepairModel>>();

/** One loaded copy of a repair model folder per thread (each restore worker loads it once). */
export function sharedRepairModel(dir: string = DEFAULT_REPAIR_MODEL_DIR): Promise<RepairModel> {
  const key = resolve(dir);
  let model = shared.get(key);
  if (!model) {
    model = loadRepairModel(key);
    model.catch(() => shared.delete(key));
    shared.set(key, model);
  }
  return model;
}

/**
 * A model is a folder: TensorFlow.js layers format (model.json + weights.bin) and kinhue's
 * metadata (kinhue-model.json). Read and written with node:fs through a small IO handler; no
 * network, no tfjs-node. Each file is written under a temporary name and renamed into place, the
 * metadata last, and other files in the folder (a model card) are left alone.
 */
import { createHash } from 'node:crypto';
import { mkdir, readFile, rename, rm, stat, writeFile } from 'node:fs/promises';
import { basename, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { ModelError } from '../errors.js';
import { VERSION } from '../version.js';
import { BACKBONE_TOPOLOGY_FILE, BACKBONE_WEIGHTS_FILE, type Backbone, loadBackbone } from './backbone.js';
import { type AbBins, abBins } from './bins.js';
import { DEFAULT_DECODING } from './decoding.js';
import { DEFAULT_TEMPERATURE } from './encoding.js';
import {
  DEFAULT_WORKING_SIZE,
  METADATA_FILE,
  MODEL_FORMAT,
  MODEL_FORMAT_VERSION,
  type ModelMetadata,
  type ModelMetadataInput,
  parseMetadata,
  TOPOLOGY_FILE,
  WEIGHTS_FILE,
} from './metadata.js';
import { NETWORK_MULTIPLE, OUTPUT_STRIDE } from './network.js';

/** The shipped model folder, models/kinhue-base in the package. */
export const DEFAULT_MODEL_DIR = fileURLToPath(new URL('../../models/kinhue-base', import.meta.url));

/** A loaded model: the network and everything needed to decode its output. */
export interface KinhueModel {
  network: tf.LayersModel;
  meta: ModelMetadata;
  bins: AbBins;
  classWeights: Float32Array;
  /** The borrowed backbone, for a network that reads one. */
  backbone?: Backbone;
  /** The folder it was loaded from (absolute). */
  dir: string;
}

function sha256(data: Uint8Array): string {
  return createHash('sha256').update(data).digest('hex');
}

async function writeAtomic(file: string, data: string | Uint8Array): Promise<void> {
  const temp = `${file}.${process.pid}.${Date.now().toString(36)}.tmp`;
  try {
    await writeFile(temp, data);
    await rename(temp, file);
  } catch (error) {
    await rm(temp, { force: true });
    throw error;
  }
}

/** The layers-format artifacts of a network, taken through an in-memory save handler. */
async function artifactsOf(network: tf.LayersModel): Promise<tf.io.ModelArtifacts> {
  let captured: tf.io.ModelArtifacts | undefined;
  await network.save({
    save: async (artifacts: tf.io.ModelArtifacts) => {
      captured = artifacts;
      return { modelArtifactsInfo: tf.io.getModelArtifactsInfoForJSON(artifacts) };
    },
  });
  if (!captured) throw new Error('the network produced nothing to save');
  return captured;
}

/**
 * Writes `network` and its metadata into `dir` (created if needed). Returns the metadata written.
 * @example
 * await saveModel(net, 'models/my-archive', { name: 'my-archive', classWeights, training: { photos: 120 } });
 */
export async function saveModel(
  network: tf.LayersModel,
  dir: string,
  meta: ModelMetadataInput = {},
  backbone?: Backbone,
): Promise<ModelMetadata> {
  if ((network.inputs.length > 1) !== Boolean(backbone)) {
    throw new RangeError(`saveModel: a network with ${network.inputs.length} inputs ${backbone ? 'takes no backbone' : 'needs its backbone'}`);
  }
  const bins = meta.bins ?? abBins();
  const outChannels = (network.outputs[0].shape as number[]).at(-1);
  if (outChannels !== bins.count) {
    throw new RangeError(`saveModel: the network predicts ${outChannels} bins, the metadata describes ${bins.count}`);
  }
  const artifacts = await artifactsOf(network);
  const weights = new Uint8Array(tf.io.CompositeArrayBuffer.join(artifacts.weightData ?? new ArrayBuffer(0)));
  const topology = {
    format: 'layers-model',
    generatedBy: artifacts.generatedBy,
    convertedBy: artifacts.convertedBy ?? null,
    modelTopology: artifacts.modelTopology,
    weightsManifest: [{ paths: [WEIGHTS_FILE], weights: artifacts.weightSpecs ?? [] }],
  };
  const full: ModelMetadata = {
    format: MODEL_FORMAT,
    formatVersion: MODEL_FORMAT_VERSION,
    name: meta.name ?? basename(resolve(dir)),
    kinhueVersion: VERSION,
    savedAt: new Date().toISOString(),
    bins: { grid: bins.grid, count: bins.count, a: Array.from(bins.a), b: Array.from(bins.b) },
    decoding: meta.decoding ?? DEFAULT_DECODING,
    temperature: meta.temperature ?? DEFAULT_TEMPERATURE,
    workingSize: meta.workingSize ?? DEFAULT_WORKING_SIZE,
    network: { input: 'L/100-0.5', multiple: NETWORK_MULTIPLE, outputStride: OUTPUT_STRIDE },
    classWeights: meta.classWeights ? Array.from(meta.classWeights) : [],
    training: meta.training ?? null,
    weightsSha256: sha256(weights),
    ...(backbone ? { backbone: backbone.record } : {}),
    ...(meta.pooling ? { pooling: meta.pooling } : {}),
  };
  await mkdir(dir, { recursive: true });
  if (backbone) {
    await writeAtomic(join(dir, BACKBONE_WEIGHTS_FILE), backbone.weights);
    await writeAtomic(join(dir, BACKBONE_TOPOLOGY_FILE), backbone.topology);
  }
  await writeAtomic(join(dir, WEIGHTS_FILE), weights);
  await writeAtomic(join(dir, TOPOLOGY_FILE), `${JSON.stringify(topology)}\n`);
  await writeAtomic(join(dir, METADATA_FILE), `${JSON.stringify(full, null, 2)}\n`);
  return full;
}

async function readOrFail(file: string, dir: string, what: string): Promise<Buffer> {
  try {
    return await readFile(file);
  } catch (error) {
    const missing = (error as NodeJS.ErrnoException).code === 'ENOENT';
    throw new ModelError(missing ? `not a kinhue model: ${what} is missing` : `${what} cannot be read`, {
      file: dir,
      hint: missing
        ? 'pass a folder written by kinhue train or tune, or leave the model option out to use the shipped model'
        : 'check the folder\'s permissions',
      cause: error,
    });
  }
}

/**
 * Loads a model folder, checking that it is a kinhue model and that its weights match their
 * SHA-256. Throws ModelError naming the folder otherwise.
 * @example
 * const model = await loadModel('models/kinhue-base');
 * const out = predict(model, L, 512, 384);
 */
export async function loadModel(dir: string): Promise<KinhueModel> {
  const abs = resolve(dir);
  try {
    if (!(await stat(abs)).isDirectory()) {
      throw new ModelError('a model is a folder, this is a file', { file: dir, hint: 'pass the folder that holds kinhue-model.json' });
    }
  } catch (error) {
    if (error instanceof ModelError) throw error;
    throw new ModelError('model folder not found', {
      file: dir,
      hint: 'check the path, or leave the model option out to use the shipped model',
      cause: error,
    });
  }
  const metaText = await readOrFail(join(abs, METADATA_FILE), dir, METADATA_FILE);
  let metaJson: unknown;
  try {
    metaJson = JSON.parse(metaText.toString('utf8'));
  } catch (error) {
    throw new ModelError(`${METADATA_FILE} is not valid JSON`, { file: dir, hint: 'restore the folder from where it came, or train or tune it again', cause: error });
  }
  const meta = parseMetadata(metaJson, dir);
  const weights = await readOrFail(join(abs, WEIGHTS_FILE), dir, WEIGHTS_FILE);
  if (sha256(weights) !== meta.weightsSha256) {
    throw new ModelError(`${WEIGHTS_FILE} does not match the SHA-256 in ${METADATA_FILE}: the weights are damaged or were replaced`, {
      file: dir,
      hint: 'restore the folder from where it came (for the shipped model: reinstall kinhue), or train or tune it again',
    });
  }
  const topologyText = await readOrFail(join(abs, TOPOLOGY_FILE), dir, TOPOLOGY_FILE);
  let network: tf.LayersModel;
  try {
    const topology = JSON.parse(topologyText.toString('utf8')) as {
      modelTopology: object;
      weightsManifest: { weights: tf.io.WeightsManifestEntry[] }[];
    };
    const weightSpecs = topology.weightsManifest.flatMap((group) => group.weights);
    const buffer = weights.buffer.slice(weights.byteOffset, weights.byteOffset + weights.byteLength) as ArrayBuffer;
    network = await tf.loadLayersModel({
      load: async () => ({ modelTopology: topology.modelTopology, weightSpecs, weightData: buffer, format: 'layers-model' }),
    });
  } catch (error) {
    throw new ModelError(`${TOPOLOGY_FILE} does not describe a network these weights fit`, {
      file: dir,
      hint: 'restore the folder from where it came, or train or tune it again',
      cause: error,
    });
  }
  const bins: AbBins = { a: Float32Array.from(meta.bins.a), b: Float32Array.from(meta.bins.b), count: meta.bins.count, grid: meta.bins.grid };
  const outChannels = (network.outputs[0].shape as number[]).at(-1);
  if (outChannels !== bins.count) {
    network.dispose();
    throw new ModelError(`the network predicts ${outChannels} bins but ${METADATA_FILE} lists ${bins.count}`, {
      file: dir,
      hint: 'restore the folder from where it came, or train or tune it again',
    });
  }
  const backbone = meta.backbone ? await loadBackbone(abs, meta.backbone) : undefined;
  if ((network.inputs.length > 1) !== Boolean(backbone)) {
    network.dispose();
    throw new ModelError(`${TOPOLOGY_FILE} and ${METADATA_FILE} disagree on whether the network reads a backbone`, {
      file: dir,
      hint: 'restore the folder from where it came, or train or tune it again',
    });
  }
  return { network, meta, bins, classWeights: Float32Array.from(meta.classWeights), dir: abs, ...(backbone ? { backbone } : {}) };
}

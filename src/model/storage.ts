/**
 * A model is a folder: TensorFlow.js layers format (model.json + weights.bin) and kinhue's
 * metadata (kinhue-model.json). Read and written with node:fs through a small IO handler; no
 * network, no tfjs-node. The files (with a borrowed backbone's, when the network reads one) are written
 * as one unit (folder.ts), and other files in the folder (a model card, a training log) are left alone.
 */
import { basename, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { ModelError } from '../errors.js';
import { VERSION } from '../version.js';
import { type Backbone, backboneFrom } from './backbone.js';
import { type AbBins, abBins } from './bins.js';
import { DEFAULT_DECODING, DEFAULT_VIVIDNESS } from './decoding.js';
import { DEFAULT_TEMPERATURE } from './encoding.js';
import {
  DEFAULT_WORKING_SIZE,
  METADATA_FILE,
  MODEL_FORMAT,
  MODEL_FORMAT_VERSION,
  type ModelMetadata,
  type ModelMetadataInput,
  TOPOLOGY_FILE,
  WEIGHTS_FILE,
} from './metadata.js';
import { readModelFiles, sha256, writeModelFiles } from './folder.js';
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
  /** SHA-256 of its model.json as loaded. */
  topologySha256: string;
  /** Things to tell the user, e.g. that an older folder's layout could not be checked. */
  warnings: string[];
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
  if (network.inputs.length > 1 !== Boolean(backbone)) {
    throw new RangeError(
      `saveModel: a network with ${network.inputs.length} inputs ${backbone ? 'takes no backbone' : 'needs its backbone'}`,
    );
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
  const topologyText = `${JSON.stringify(topology)}\n`;
  const full: ModelMetadata = {
    format: MODEL_FORMAT,
    formatVersion: MODEL_FORMAT_VERSION,
    name: meta.name ?? basename(resolve(dir)),
    kinhueVersion: VERSION,
    savedAt: new Date().toISOString(),
    bins: { grid: bins.grid, count: bins.count, a: Array.from(bins.a), b: Array.from(bins.b) },
    decoding: meta.decoding ?? DEFAULT_DECODING,
    temperature: meta.temperature ?? DEFAULT_TEMPERATURE,
    vividness: meta.vividness ?? DEFAULT_VIVIDNESS,
    workingSize: meta.workingSize ?? DEFAULT_WORKING_SIZE,
    network: { input: 'L/100-0.5', multiple: NETWORK_MULTIPLE, outputStride: OUTPUT_STRIDE },
    classWeights: meta.classWeights ? Array.from(meta.classWeights) : [],
    training: meta.training ?? null,
    weightsSha256: sha256(weights),
    ...(backbone ? { backbone: backbone.record } : {}),
    ...(meta.pooling ? { pooling: meta.pooling } : {}),
    topologySha256: sha256(topologyText),
  };
  await writeModelFiles(dir, {
    weights,
    topology: topologyText,
    metadata: `${JSON.stringify(full, null, 2)}\n`,
    ...(backbone ? { backbone: { topology: backbone.topology, weights: backbone.weights } } : {}),
  });
  return full;
}

/**
 * Loads a model folder, checking that it is a kinhue model and that its weights and layout (model.json)
 * match their SHA-256. Throws ModelError naming the folder (or the file at fault) otherwise.
 * @example
 * const model = await loadModel('models/kinhue-base');
 * const out = predict(model, L, 512, 384);
 */
export async function loadModel(dir: string): Promise<KinhueModel> {
  const abs = resolve(dir);
  const files = await readModelFiles(dir);
  const { meta, weights, topology: topologyText, topologySha256, warnings } = files;
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
  const bins: AbBins = {
    a: Float32Array.from(meta.bins.a),
    b: Float32Array.from(meta.bins.b),
    count: meta.bins.count,
    grid: meta.bins.grid,
  };
  const outChannels = (network.outputs[0].shape as number[]).at(-1);
  if (outChannels !== bins.count) {
    network.dispose();
    throw new ModelError(`the network predicts ${outChannels} bins but ${METADATA_FILE} lists ${bins.count}`, {
      file: dir,
      hint: 'restore the folder from where it came, or train or tune it again',
    });
  }
  // The backbone comes from the bytes checked with the rest, which may be a staged set (see folder.ts).
  const backbone =
    meta.backbone && files.backbone ? await backboneFrom(files.backbone.topology, files.backbone.weights, meta.backbone.name) : undefined;
  if (network.inputs.length > 1 !== Boolean(backbone)) {
    network.dispose();
    throw new ModelError(`${TOPOLOGY_FILE} and ${METADATA_FILE} disagree on whether the network reads a backbone`, {
      file: dir,
      hint: 'restore the folder from where it came, or train or tune it again',
    });
  }
  return {
    network,
    meta,
    bins,
    classWeights: Float32Array.from(meta.classWeights),
    dir: abs,
    topologySha256,
    warnings,
    ...(backbone ? { backbone } : {}),
  };
}

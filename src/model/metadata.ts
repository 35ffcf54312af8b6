/**
 * kinhue's own description of a model folder, `kinhue-model.json`: the bins and decoding
 * settings the network was trained for, what it was trained on, and the SHA-256 of its weights
 * and of its layout file (model.json).
 */
import { ModelError } from '../errors.js';
import type { BackboneRecord } from './backbone.js';
import type { AbBins } from './bins.js';
import type { PoolingSettings } from './region-pooling.js';
import { DECODINGS, type Decoding } from './decoding.js';

/** File names inside a model folder. */
export const METADATA_FILE = 'kinhue-model.json';
export const TOPOLOGY_FILE = 'model.json';
export const WEIGHTS_FILE = 'weights.bin';
/** The `format` value that marks a kinhue model, and the layout version of this file. */
export const MODEL_FORMAT = 'kinhue-model';
export const MODEL_FORMAT_VERSION = 1;
/** Default long side, in pixels, that scans are resized to before prediction. */
export const DEFAULT_WORKING_SIZE = 512;

/** Free-form record of training (data, photos, steps, seconds, settings, scores). JSON only. */
export type TrainingRecord = Record<string, unknown>;

export interface ModelMetadata {
  format: typeof MODEL_FORMAT;
  formatVersion: number;
  /** A short name for reports and provenance records. */
  name: string;
  /** kinhue version that wrote the folder. */
  kinhueVersion: string;
  /** ISO 8601 time the folder was written. */
  savedAt: string;
  bins: { grid: number; count: number; a: number[]; b: number[] };
  /** How colour is chosen from the predicted distribution ('annealed-mean' for folders that do not say). */
  decoding: Decoding;
  /** Annealed-mean temperature used unless the user picks another. */
  temperature: number;
  /** How much class rebalancing least-CIEDE2000 decoding leaves in (decoding.ts); 0 for folders that do not say. */
  vividness: number;
  /** Long side in pixels that scans are resized to before prediction. */
  workingSize: number;
  /** How the network reads its input and shapes its output. */
  network: { input: 'L/100-0.5'; multiple: number; outputStride: number };
  /** Rebalancing weight per bin the model was trained with (empty when untrained). */
  classWeights: number[];
  /** What it was trained on, how long, with which settings; null for an untrained network. */
  training: TrainingRecord | null;
  /** SHA-256 (hex) of weights.bin. */
  weightsSha256: string;
  /** The borrowed backbone whose features the network reads beside L* (backbone.ts); absent for L* alone. */
  backbone?: BackboneRecord;
  /** Region pooling before the colour is chosen (region-pooling.ts); absent for none. */
  pooling?: PoolingSettings;
  /** SHA-256 (hex) of model.json; absent in folders written before kinhue recorded it (their layout is not checked). */
  topologySha256?: string;
}

/** What a caller of saveModel supplies; the rest is filled in. */
export interface ModelMetadataInput {
  name?: string;
  decoding?: Decoding;
  temperature?: number;
  vividness?: number;
  workingSize?: number;
  bins?: AbBins;
  classWeights?: ArrayLike<number>;
  training?: TrainingRecord | null;
  pooling?: PoolingSettings;
}

const HINT = 'pass a folder written by kinhue train or tune, or leave the model option out to use the shipped model';

function fail(dir: string, message: string): never {
  throw new ModelError(message, { file: dir, hint: HINT });
}

function isNumberArray(x: unknown, length?: number): x is number[] {
  return Array.isArray(x) && (length === undefined || x.length === length) && x.every((v) => typeof v === 'number' && Number.isFinite(v));
}

/**
 * Checks parsed JSON against the metadata layout; throws ModelError naming `dir` otherwise.
 * @example
 * const meta = parseMetadata(JSON.parse(text), 'models/kinhue-base');
 */
export function parseMetadata(json: unknown, dir: string): ModelMetadata {
  if (typeof json !== 'object' || json === null) fail(dir, `${METADATA_FILE} is not a JSON object`);
  const m = json as Record<string, unknown>;
  if (m.format !== MODEL_FORMAT) fail(dir, `${METADATA_FILE} does not describe a kinhue model (format is ${JSON.stringify(m.format)})`);
  if (typeof m.formatVersion !== 'number' || m.formatVersion > MODEL_FORMAT_VERSION) {
    throw new ModelError(`${METADATA_FILE} has layout version ${String(m.formatVersion)}, newer than this kinhue reads`, {
      file: dir,
      hint: 'update kinhue to the version that wrote this model',
    });
  }
  const bins = m.bins as Record<string, unknown> | undefined;
  if (
    !bins ||
    typeof bins.count !== 'number' ||
    typeof bins.grid !== 'number' ||
    !isNumberArray(bins.a, bins.count) ||
    !isNumberArray(bins.b, bins.count)
  ) {
    fail(dir, `${METADATA_FILE} has no valid a*b* bins`);
  }
  if (typeof m.temperature !== 'number' || !(m.temperature > 0)) fail(dir, `${METADATA_FILE} has no valid temperature`);
  // Folders written before the choice existed were decoded by annealed mean.
  const decoding = m.decoding ?? 'annealed-mean';
  if (!DECODINGS.includes(decoding as Decoding)) fail(dir, `${METADATA_FILE} names an unknown decoding ${JSON.stringify(m.decoding)}`);
  // Folders written before the setting existed were decoded with the rebalancing wholly undone.
  const vividness = m.vividness ?? 0;
  if (typeof vividness !== 'number' || !(vividness >= 0 && vividness <= 1)) fail(dir, `${METADATA_FILE} has a vividness outside 0 to 1`);
  if (typeof m.workingSize !== 'number' || !(m.workingSize >= 16)) fail(dir, `${METADATA_FILE} has no valid working size`);
  if (typeof m.weightsSha256 !== 'string' || !/^[0-9a-f]{64}$/.test(m.weightsSha256)) fail(dir, `${METADATA_FILE} has no weights SHA-256`);
  if (m.topologySha256 !== undefined && (typeof m.topologySha256 !== 'string' || !/^[0-9a-f]{64}$/.test(m.topologySha256))) {
    fail(dir, `${METADATA_FILE} has a ${TOPOLOGY_FILE} SHA-256 that is not one`);
  }
  if (!isNumberArray(m.classWeights) || (m.classWeights.length !== 0 && m.classWeights.length !== bins.count)) {
    fail(dir, `${METADATA_FILE} has class weights that do not match its bins`);
  }
  const network = m.network as Record<string, unknown> | undefined;
  if (!network || typeof network.multiple !== 'number' || typeof network.outputStride !== 'number') {
    fail(dir, `${METADATA_FILE} does not say how the network is shaped`);
  }
  return {
    format: MODEL_FORMAT,
    formatVersion: m.formatVersion,
    name: typeof m.name === 'string' ? m.name : 'unnamed',
    kinhueVersion: typeof m.kinhueVersion === 'string' ? m.kinhueVersion : 'unknown',
    savedAt: typeof m.savedAt === 'string' ? m.savedAt : '',
    bins: { grid: bins.grid as number, count: bins.count as number, a: bins.a as number[], b: bins.b as number[] },
    decoding: decoding as Decoding,
    temperature: m.temperature,
    vividness,
    workingSize: m.workingSize,
    network: { input: 'L/100-0.5', multiple: network.multiple as number, outputStride: network.outputStride as number },
    classWeights: m.classWeights,
    training: typeof m.training === 'object' && m.training !== null ? (m.training as TrainingRecord) : null,
    weightsSha256: m.weightsSha256,
    ...(m.backbone === undefined ? {} : { backbone: parseBackbone(m.backbone, dir) }),
    ...(m.pooling === undefined ? {} : { pooling: parsePooling(m.pooling, dir) }),
    ...(typeof m.topologySha256 === 'string' ? { topologySha256: m.topologySha256 } : {}),
  };
}

function parseBackbone(json: unknown, dir: string): BackboneRecord {
  const r = json as Record<string, unknown> | null;
  const hex = (v: unknown): v is string => typeof v === 'string' && /^[0-9a-f]{64}$/.test(v);
  if (!r || typeof r.name !== 'string' || !hex(r.topologySha256) || !hex(r.weightsSha256))
    fail(dir, `${METADATA_FILE} describes its backbone incompletely`);
  return { name: r.name, topologySha256: r.topologySha256, weightsSha256: r.weightsSha256 };
}

function parsePooling(json: unknown, dir: string): PoolingSettings {
  const r = json as Record<string, unknown> | null;
  if (!r || typeof r.spatial !== 'number' || !(r.spatial > 0) || typeof r.range !== 'number' || !(r.range > 0)) {
    fail(dir, `${METADATA_FILE} has region pooling settings that are not two positive numbers`);
  }
  return { spatial: r.spatial as number, range: r.range as number };
}

/**
 * What a run needs to know about its model before any worker starts: its name, weights hash, default
 * decoding, temperature and working size, from its metadata file, with the weights checked against their hash so
 * a damaged folder fails the run at once. No network is built here (the workers load their own), so the
 * main thread never starts a TensorFlow.js backend.
 */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { ModelError } from '../errors.js';
import { METADATA_FILE, WEIGHTS_FILE, parseMetadata, type Decoding } from '../model/index.js';

export interface ModelInfo {
  dir: string;
  name: string;
  weightsSha256: string;
  decoding: Decoding;
  temperature: number;
  /** The working size the model was trained for. */
  workingSize: number;
}

const HINT = 'check the --model path, or leave --model out to use the shipped model';

async function read(dir: string, file: string): Promise<Buffer> {
  try {
    return await readFile(join(dir, file));
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    const message = code === 'ENOENT' ? `not a kinhue model folder: ${file} is missing` : `${file} cannot be read (${code ?? 'error'})`;
    throw new ModelError(message, { file: dir, hint: HINT, cause: error });
  }
}

/**
 * Reads and checks a model folder's identity. Throws ModelError naming the folder.
 * @example
 *   const info = await readModelInfo('models/kinhue-base');
 */
export async function readModelInfo(dir: string): Promise<ModelInfo> {
  const abs = resolve(dir);
  const text = await read(abs, METADATA_FILE);
  let json: unknown;
  try {
    json = JSON.parse(text.toString('utf8'));
  } catch (error) {
    throw new ModelError(`${METADATA_FILE} is not valid JSON`, { file: dir, hint: HINT, cause: error });
  }
  const meta = parseMetadata(json, dir);
  const weights = await read(abs, WEIGHTS_FILE);
  if (createHash('sha256').update(weights).digest('hex') !== meta.weightsSha256) {
    throw new ModelError(`${WEIGHTS_FILE} does not match the SHA-256 in ${METADATA_FILE}: the weights are damaged or were replaced`, {
      file: dir,
      hint: 'restore the folder from where it came (for the shipped model: reinstall kinhue), or train or tune it again',
    });
  }
  return { dir: abs, name: meta.name, weightsSha256: meta.weightsSha256, decoding: meta.decoding, temperature: meta.temperature, workingSize: meta.workingSize };
}

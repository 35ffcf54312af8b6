/**
 * Training checkpoints: one file holding everything a run needs to carry on exactly where it stopped
 * (weights, optimiser state, random state, data order, step, best score). Numbers are stored as their
 * raw bytes, so a resumed run starts from bit-identical values. Written atomically: a crash while
 * writing leaves the previous checkpoint intact.
 *
 * Layout (our own): the 8 bytes "KHCKPT1\n", a little-endian uint32 header length, the header as UTF-8
 * JSON, zero padding to a multiple of 8, then the arrays the header points to (by byte offset).
 */
import { readFile } from 'node:fs/promises';
import * as tf from '@tensorflow/tfjs';
import { ErrorCodes, KinhueError } from '../errors.js';
import { writeFileAtomic } from '../files/index.js';

const MAGIC = 'KHCKPT1\n';

/** The file name of the checkpoint inside a run's output folder. */
export const CHECKPOINT_FILE = 'training-checkpoint.bin';

type ArrayKind = 'float32' | 'int32' | 'uint8' | 'float64' | 'uint32';
type NumericArray = Float32Array | Int32Array | Uint8Array | Float64Array | Uint32Array;

interface BlobRef {
  $blob: number;
  kind: ArrayKind;
  /** Present when the value was a tensor (restored as one). */
  shape?: number[];
}

function kindOf(array: NumericArray): ArrayKind {
  if (array instanceof Float32Array) return 'float32';
  if (array instanceof Int32Array) return 'int32';
  if (array instanceof Uint8Array) return 'uint8';
  if (array instanceof Float64Array) return 'float64';
  return 'uint32';
}

function isNumericArray(v: unknown): v is NumericArray {
  return (
    v instanceof Float32Array || v instanceof Int32Array || v instanceof Uint8Array || v instanceof Float64Array || v instanceof Uint32Array
  );
}

/**
 * Turns any mix of plain values, typed arrays and tensors into JSON plus a list of byte blobs.
 * Tensors are read without being disposed: the caller owns them.
 */
async function flatten(value: unknown, blobs: Uint8Array[]): Promise<unknown> {
  if (value instanceof tf.Tensor) {
    const data = (await value.data()) as NumericArray;
    const ref: BlobRef = {
      $blob: blobs.length,
      kind: value.dtype === 'int32' ? 'int32' : value.dtype === 'bool' ? 'uint8' : 'float32',
      shape: value.shape,
    };
    blobs.push(new Uint8Array(data.buffer, data.byteOffset, data.byteLength).slice());
    return ref;
  }
  if (isNumericArray(value)) {
    blobs.push(new Uint8Array(value.buffer, value.byteOffset, value.byteLength).slice());
    return { $blob: blobs.length - 1, kind: kindOf(value) } satisfies BlobRef;
  }
  if (Array.isArray(value)) return Promise.all(value.map((v) => flatten(v, blobs)));
  if (value !== null && typeof value === 'object') {
    const out: Record<string, unknown> = {};
    for (const [k, v] of Object.entries(value)) out[k] = await flatten(v, blobs);
    return out;
  }
  return value;
}

function unflatten(value: unknown, blobs: (offset: number, kind: ArrayKind, index: number) => NumericArray): unknown {
  if (Array.isArray(value)) return value.map((v) => unflatten(v, blobs));
  if (value !== null && typeof value === 'object') {
    const ref = value as Partial<BlobRef>;
    if (typeof ref.$blob === 'number' && typeof ref.kind === 'string') {
      const array = blobs(0, ref.kind, ref.$blob);
      if (ref.shape)
        return tf.tensor(
          array as Float32Array | Int32Array | Uint8Array,
          ref.shape,
          ref.kind === 'int32' ? 'int32' : ref.kind === 'uint8' ? 'bool' : 'float32',
        );
      return array;
    }
    const out: Record<string, unknown> = {};
    for (const [k, v] of Object.entries(value)) out[k] = unflatten(v, blobs);
    return out;
  }
  return value;
}

/**
 * Writes a checkpoint atomically. `state` may hold plain JSON values, typed arrays and tensors.
 * @example
 *   await saveCheckpoint('run/training-checkpoint.bin', { step: 10, weights: model.getWeights() });
 */
export async function saveCheckpoint(path: string, state: Record<string, unknown>): Promise<void> {
  const blobs: Uint8Array[] = [];
  const body = await flatten(state, blobs);
  const offsets: number[] = [];
  let size = 0;
  for (const blob of blobs) {
    offsets.push(size);
    size += Math.ceil(blob.byteLength / 8) * 8;
  }
  const header = Buffer.from(JSON.stringify({ body, blobs: blobs.map((b, i) => ({ offset: offsets[i], bytes: b.byteLength })) }), 'utf8');
  const headerEnd = Math.ceil((MAGIC.length + 4 + header.byteLength) / 8) * 8;
  const file = Buffer.alloc(headerEnd + size);
  file.write(MAGIC, 0, 'latin1');
  file.writeUInt32LE(header.byteLength, MAGIC.length);
  header.copy(file, MAGIC.length + 4);
  blobs.forEach((blob, i) => file.set(blob, headerEnd + offsets[i]!));
  await writeFileAtomic(path, file);
}

/**
 * Reads a checkpoint written by {@link saveCheckpoint}. Arrays come back as the typed arrays (or
 * tensors, which the caller must dispose) they were saved as.
 * @example
 *   const state = await loadCheckpoint('run/training-checkpoint.bin');
 */
export async function loadCheckpoint(path: string): Promise<Record<string, unknown>> {
  let file: Buffer;
  try {
    file = await readFile(path);
  } catch (error) {
    throw new KinhueError(ErrorCodes.UNREADABLE, 'no training checkpoint to resume from', {
      file: path,
      hint: 'run the same command without --resume to start a new run in this folder.',
      cause: error,
    });
  }
  const bad = (why: string): KinhueError =>
    new KinhueError(ErrorCodes.BAD_DATA, `not a usable kinhue training checkpoint (${why})`, {
      file: path,
      hint: 'delete it and run the command without --resume to start again.',
    });
  if (file.byteLength < MAGIC.length + 4 || file.toString('latin1', 0, MAGIC.length) !== MAGIC) throw bad('wrong signature');
  const headerLength = file.readUInt32LE(MAGIC.length);
  if (MAGIC.length + 4 + headerLength > file.byteLength) throw bad('truncated');
  let header: { body: unknown; blobs: { offset: number; bytes: number }[] };
  try {
    header = JSON.parse(file.toString('utf8', MAGIC.length + 4, MAGIC.length + 4 + headerLength));
  } catch {
    throw bad('unreadable header');
  }
  const headerEnd = Math.ceil((MAGIC.length + 4 + headerLength) / 8) * 8;
  const read = (_: number, kind: ArrayKind, index: number): NumericArray => {
    const entry = header.blobs[index];
    if (!entry || headerEnd + entry.offset + entry.bytes > file.byteLength) throw bad('truncated');
    // Copy into a fresh, aligned buffer so every typed array view is valid.
    const bytes = file.subarray(headerEnd + entry.offset, headerEnd + entry.offset + entry.bytes);
    const copy = new ArrayBuffer(entry.bytes);
    new Uint8Array(copy).set(bytes);
    switch (kind) {
      case 'float32':
        return new Float32Array(copy);
      case 'int32':
        return new Int32Array(copy);
      case 'uint8':
        return new Uint8Array(copy);
      case 'float64':
        return new Float64Array(copy);
      default:
        return new Uint32Array(copy);
    }
  };
  return unflatten(header.body, read) as Record<string, unknown>;
}

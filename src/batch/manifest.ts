/**
 * The run manifest, `kinhue-run.jsonl` in the output folder: one JSON line per outcome, appended and
 * never rewritten, so an interrupted run loses nothing already recorded. The last line for an output
 * name wins. A later run skips an output whose last line says done with the same source SHA-256 and
 * the same settings key (and whose files are all still there), and retries everything else.
 */
import { appendFile, readFile } from 'node:fs/promises';
import { ErrorCodes, KinhueError } from '../errors.js';

export type ManifestStatus = 'done' | 'failed';

export interface ManifestRecord {
  /** When the outcome was recorded (ISO 8601). */
  time: string;
  status: ManifestStatus;
  /** The source as found (absolute path). */
  source: string;
  /** The result image, relative to the output folder: the record's key. */
  output: string;
  /** Other files written beside it, relative to the output folder. */
  companions?: string[];
  /** Source size in bytes, modification time (ms) and SHA-256 of its bytes. */
  size?: number;
  mtimeMs?: number;
  sha256?: string;
  /** The settings key (see settingsKey). */
  settings: string;
  /** SHA-256 of the hints file used, null when there was none (absent in records that predate it). */
  hintsSha256?: string | null;
  /** Seconds the file took. */
  seconds?: number;
  /** For failures: the error code, message and next step. */
  error?: { code: string; message: string; hint?: string };
}

/**
 * Reads a manifest into a map from output name to its last record. A missing file is an empty
 * manifest; a line that is not JSON (a crash mid-write) is ignored.
 * @example
 *   const last = await readManifest('restored/kinhue-run.jsonl');
 */
export async function readManifest(path: string): Promise<Map<string, ManifestRecord>> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code === 'ENOENT') return new Map();
    throw new KinhueError(ErrorCodes.UNREADABLE, 'the run manifest could not be read', {
      file: path,
      hint: 'check its permissions, or choose another --out folder',
      cause: error,
    });
  }
  const last = new Map<string, ManifestRecord>();
  for (const line of text.split('\n')) {
    if (!line.trim()) continue;
    try {
      const record = JSON.parse(line) as ManifestRecord;
      if (record && typeof record.output === 'string' && (record.status === 'done' || record.status === 'failed')) {
        last.set(record.output, record);
      }
    } catch {
      // A torn last line from a killed process: the file it describes is simply redone.
    }
  }
  return last;
}

/**
 * Appends one record as one line.
 * @example
 *   await appendManifest('restored/kinhue-run.jsonl', record);
 */
export async function appendManifest(path: string, record: ManifestRecord): Promise<void> {
  try {
    await appendFile(path, `${JSON.stringify(record)}\n`, 'utf8');
  } catch (error) {
    throw new KinhueError(ErrorCodes.WRITE_FAILED, 'the run manifest could not be written', {
      file: path,
      hint: 'check that the output folder is writable and has free space, then run again',
      cause: error,
    });
  }
}

/**
 * The run manifest, `kinhue-run.jsonl` in the output folder: one JSON line per outcome, appended and
 * never rewritten, so an interrupted run loses nothing already recorded. The last line for an output
 * name wins. A later run skips an output whose last line says done with the same source SHA-256 and
 * the same settings key (and whose files are all still there), and retries everything else. A line
 * cut short by a kill or a full disk is ended with a newline when the next run starts, so no later
 * record is glued onto it.
 */
import { appendFile, readFile } from 'node:fs/promises';
import { basename } from 'node:path';
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

export interface ManifestContents {
  /** The last record per output name. */
  records: Map<string, ManifestRecord>;
  /** Lines that were not records, said for people (line numbers count from 1). */
  notes: string[];
  /** True when the file does not end with a newline: its last line was cut short (see terminateManifest). */
  torn: boolean;
}

/** Where a record written by appendManifest starts (its first key is `time`). */
const RECORD_START = '{"time":';

function asRecord(text: string): ManifestRecord | undefined {
  try {
    const record = JSON.parse(text) as ManifestRecord;
    return record && typeof record.output === 'string' && (record.status === 'done' || record.status === 'failed') ? record : undefined;
  } catch {
    return undefined;
  }
}

/**
 * Reads a manifest: the last record per output name, and notes on lines that are not records. A
 * missing file is an empty manifest. A record cut short (a run killed or a disk full while writing)
 * is ignored, so its scan is redone; a record that a later run wrote onto the same line is still
 * read, so one damaged line never hides another record.
 * @example
 *   const { records, notes, torn } = await loadManifest('restored/kinhue-run.jsonl');
 */
export async function loadManifest(path: string): Promise<ManifestContents> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code === 'ENOENT') return { records: new Map(), notes: [], torn: false };
    throw new KinhueError(ErrorCodes.UNREADABLE, 'the run manifest could not be read', {
      file: path,
      hint: 'check its permissions, or choose another --out folder',
      cause: error,
    });
  }
  const records = new Map<string, ManifestRecord>();
  const notes: string[] = [];
  const torn = text.length > 0 && !text.endsWith('\n');
  const lines = text.split('\n');
  lines.forEach((line, i) => {
    if (!line.trim()) return;
    const whole = asRecord(line);
    if (whole) {
      records.set(whole.output, whole);
      return;
    }
    // A cut-short record with others appended to it on the same line: read every record that starts there.
    const kept: ManifestRecord[] = [];
    for (let at = line.indexOf(RECORD_START, 1); at > 0; at = line.indexOf(RECORD_START, at + 1)) {
      const record = asRecord(line.slice(at));
      if (record) {
        kept.push(record);
        break;
      }
    }
    for (const record of kept) records.set(record.output, record);
    const where = `${basename(path)} line ${i + 1}`;
    notes.push(
      torn && i === lines.length - 1
        ? `${where} was cut short (a run stopped while writing it) and is ignored; the scan it was about is done again`
        : kept.length
          ? `${where} starts with a record cut short, which is ignored; the record after it on that line is kept`
          : `${where} is not a record kinhue wrote and is ignored`,
    );
  });
  return { records, notes, torn };
}

/**
 * Reads a manifest into a map from output name to its last record (see loadManifest).
 * @example
 *   const last = await readManifest('restored/kinhue-run.jsonl');
 */
export async function readManifest(path: string): Promise<Map<string, ManifestRecord>> {
  return (await loadManifest(path)).records;
}

/**
 * Ends a cut-short last line with a newline, so the next record starts on a line of its own.
 * @example
 *   if ((await loadManifest(path)).torn) await terminateManifest(path);
 */
export async function terminateManifest(path: string): Promise<void> {
  try {
    await appendFile(path, '\n', 'utf8');
  } catch (error) {
    throw manifestWriteFailure(path, error);
  }
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
    throw manifestWriteFailure(path, error);
  }
}

function manifestWriteFailure(path: string, error: unknown): KinhueError {
  return new KinhueError(ErrorCodes.WRITE_FAILED, 'the run manifest could not be written', {
    file: path,
    hint: 'check that the output folder is writable and has free space, then run again',
    cause: error,
  });
}

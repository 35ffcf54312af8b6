/**
 * A run manifest, `kinhue-run.jsonl` in the output folder (one per part of a split run, see
 * run-folder.ts): one JSON line per outcome, appended and never rewritten, so an interrupted run loses
 * nothing already recorded, and one line each time a run starts (its part, machine, process and
 * counts, read by `kinhue progress`). The last line for an output name wins. A later run skips an
 * output whose last line says done with the same source SHA-256 and the same settings key (and whose
 * files are all still there), and retries everything else. A line cut short by a kill or a full disk
 * is ended with a newline when the next run starts, so no later record is glued onto it.
 */
import { appendFile, readFile } from 'node:fs/promises';
import { basename } from 'node:path';
import { ErrorCodes, KinhueError } from '../errors.js';
import type { Part } from './part.js';

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

/** The line a run writes when it starts work. */
export interface RunStart {
  time: string;
  start: {
    /** The part of a split run; null for a run of all scans. */
    part: Part | null;
    /** The machine (see hostLabel) and process. */
    host: string;
    pid: number;
    /** Scans of this part that the run restores or skips (not conflicts or refused outputs). */
    files: number;
    /** Scans found, in all parts. */
    all: number;
    /** Scans left to restore when it started. */
    toRun: number;
    /** The settings key of the run. */
    settings: string;
  };
}

export interface ManifestContents {
  /** The last record per output name. */
  records: Map<string, ManifestRecord>;
  /** Every record, in the order written. */
  history: ManifestRecord[];
  /** Every start line, in the order written. */
  starts: RunStart[];
  /** Lines that were not records, said for people (line numbers count from 1). */
  notes: string[];
  /** True when the file does not end with a newline: its last line was cut short (see terminateManifest). */
  torn: boolean;
}

/** Where a line written by appendManifest starts (its first key is `time`). */
const RECORD_START = '{"time":';

/** One line read: an outcome record, a start line, or undefined when it is neither. */
function asLine(text: string): ManifestRecord | RunStart | undefined {
  try {
    const line = JSON.parse(text) as Partial<ManifestRecord & RunStart> | null;
    if (!line || typeof line.time !== 'string') return undefined;
    if (typeof line.output === 'string' && (line.status === 'done' || line.status === 'failed')) return line as ManifestRecord;
    if (line.start && typeof line.start === 'object' && typeof line.start.files === 'number') return line as RunStart;
    return undefined;
  } catch {
    return undefined;
  }
}

/**
 * Reads a manifest: the last record per output name, every record and start line, and notes on
 * lines that are neither. A missing file is an empty manifest. A record cut short (a run killed or a
 * disk full while writing) is ignored, so its scan is redone; a record that a later run wrote onto
 * the same line is still read, so one damaged line never hides another record. With `growing` (the
 * manifest of another part, which may be writing its last line right now) an unfinished last line
 * is ignored without a note.
 * @example
 *   const { records, notes, torn } = await loadManifest('restored/kinhue-run.jsonl');
 */
export async function loadManifest(path: string, options: { growing?: boolean } = {}): Promise<ManifestContents> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code === 'ENOENT') return { records: new Map(), history: [], starts: [], notes: [], torn: false };
    throw new KinhueError(ErrorCodes.UNREADABLE, 'the run manifest could not be read', {
      file: path,
      hint: 'check its permissions, or choose another --out folder',
      cause: error,
    });
  }
  const records = new Map<string, ManifestRecord>();
  const history: ManifestRecord[] = [];
  const starts: RunStart[] = [];
  const notes: string[] = [];
  const torn = text.length > 0 && !text.endsWith('\n');
  const lines = text.split('\n');
  const keep = (line: ManifestRecord | RunStart): void => {
    if ('start' in line) starts.push(line);
    else {
      history.push(line);
      records.set(line.output, line);
    }
  };
  lines.forEach((line, i) => {
    if (!line.trim()) return;
    if (torn && options.growing && i === lines.length - 1) return;
    const whole = asLine(line);
    if (whole) {
      keep(whole);
      return;
    }
    // A cut-short record with another appended to it on the same line: read the one that starts there.
    const kept: (ManifestRecord | RunStart)[] = [];
    for (let at = line.indexOf(RECORD_START, 1); at > 0; at = line.indexOf(RECORD_START, at + 1)) {
      const record = asLine(line.slice(at));
      if (record) {
        kept.push(record);
        break;
      }
    }
    for (const record of kept) keep(record);
    const where = `${basename(path)} line ${i + 1}`;
    notes.push(
      torn && i === lines.length - 1
        ? `${where} was cut short (a run stopped while writing it) and is ignored; the scan it was about is done again`
        : kept.length
          ? `${where} starts with a record cut short, which is ignored; the record after it on that line is kept`
          : `${where} is not a record kinhue wrote and is ignored`,
    );
  });
  return { records, history, starts, notes, torn };
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
 * Appends one record (or start line) as one line.
 * @example
 *   await appendManifest('restored/kinhue-run.jsonl', record);
 */
export async function appendManifest(path: string, record: ManifestRecord | RunStart): Promise<void> {
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

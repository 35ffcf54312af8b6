/**
 * How far a run has got, from its output folder alone: done, failed and pending scans per part and in
 * all, with the rate and the time left. Each run writes a start line (its part's number of scans and
 * settings) and one record per outcome (see manifest.ts), so no scan needs to be searched for again;
 * records count under the settings of the latest start, since a scan restored with others is done
 * again. Read while parts are at work on other machines: nothing is written.
 */
import type { RunStart, ManifestRecord } from './manifest.js';
import { partOf, type Part } from './part.js';
import type { RunFolder } from './run-folder.js';

/** One part (or the whole run when it is not split). */
export interface PartProgress {
  /** Null when the run is not split. */
  part: Part | null;
  /** When it last started (ISO 8601); null when it has not started. */
  started: string | null;
  /** The machine of its latest start. */
  host: string | null;
  /** Scans in it (as found at its latest start); null before it starts. */
  files: number | null;
  done: number;
  failed: number;
  /** Scans neither done nor failed; null before it starts. */
  pending: number | null;
  /** Scans finished (done or failed) per minute since its latest start; null before one finished. */
  perMinute: number | null;
  /** Seconds left at that rate; 0 when nothing is pending; null when unknown. */
  secondsLeft: number | null;
  /** When its latest record was written; null when none since its latest start. */
  lastRecord: string | null;
}

export interface RunProgress {
  folder: string;
  /** The settings key of the latest start; null before any start. */
  settings: string | null;
  /** The number of parts of the latest start's split; null when not split. */
  split: number | null;
  /** Per part, in order (one entry when not split). */
  parts: PartProgress[];
  /** All parts together: the rate is the sum of the rates of parts still at work. */
  total: Omit<PartProgress, 'part' | 'started' | 'host' | 'lastRecord'>;
  /** Damaged manifest lines, said for people. */
  notes: string[];
}

interface Start {
  line: RunStart;
  /** Outcomes written by the run that started there (the manifest's records after the line). */
  history: ManifestRecord[];
}

const latest = <T extends { time: string }>(xs: T[]): T | undefined =>
  xs.reduce<T | undefined>((a, x) => (!a || x.time >= a.time ? x : a), undefined);

/**
 * The progress of the run in a folder read by loadRunFolder, as of `now` (ms since 1970).
 * @example
 *   const p = runProgress(await loadRunFolder('restored'));
 *   p.total.pending; // 1520
 */
export function runProgress(run: RunFolder, now: number = Date.now()): RunProgress {
  // Each start line with the records written after it in the same manifest.
  const starts: Start[] = [];
  for (const m of run.manifests) {
    const { starts: lines, history } = m.contents;
    lines.forEach((line, i) => {
      const until = lines[i + 1]?.time;
      starts.push({ line, history: history.filter((r) => r.time >= line.time && (until === undefined || r.time < until)) });
    });
  }
  const last = latest(starts.map((s) => s.line));
  const settings = last?.start.settings ?? null;
  const split = last?.start.part?.count ?? null;
  const counted = [...run.records.values()].filter((r) => settings === null || r.settings === settings);
  const rows: PartProgress[] = [];
  for (let index = 1; index <= (split ?? 1); index++) {
    const part = split ? { index, count: split } : null;
    const mine = starts.filter((s) =>
      part ? s.line.start.part?.count === split && s.line.start.part.index === index : !s.line.start.part,
    );
    const start = latest(mine.map((s) => s.line));
    const records = part ? counted.filter((r) => partOf(r.output, part.count) === index) : counted;
    const done = records.filter((r) => r.status === 'done').length;
    const failed = records.length - done;
    const since = start ? mine.filter((s) => s.line.time >= start.time).flatMap((s) => s.history) : [];
    const lastRecord = latest(since)?.time ?? null;
    const files = start?.start.files ?? null;
    const pending = files === null ? null : Math.max(0, files - done - failed);
    const until = pending === 0 && lastRecord ? Date.parse(lastRecord) : now;
    const minutes = start ? (until - Date.parse(start.time)) / 60000 : 0;
    const perMinute = since.length && minutes > 0 ? since.length / minutes : null;
    rows.push({
      part,
      started: start?.time ?? null,
      host: start?.start.host ?? null,
      files,
      done,
      failed,
      pending,
      perMinute,
      secondsLeft: secondsLeft(pending, perMinute),
      lastRecord,
    });
  }
  const sum = (pick: (row: PartProgress) => number): number => rows.reduce((a, row) => a + pick(row), 0);
  const files = rows.every((row) => row.files !== null) ? sum((row) => row.files!) : (last?.start.all ?? null);
  const done = sum((row) => row.done);
  const failed = sum((row) => row.failed);
  const pending = files === null ? null : Math.max(0, files - done - failed);
  const working = rows.filter((row) => row.pending !== 0 && row.perMinute !== null);
  const perMinute = working.length ? working.reduce((a, row) => a + row.perMinute!, 0) : null;
  return {
    folder: run.folder,
    settings,
    split,
    parts: rows,
    notes: run.notes,
    total: {
      files,
      done,
      failed,
      pending,
      perMinute,
      secondsLeft: secondsLeft(pending, perMinute),
    },
  };
}

/** Seconds until `pending` files are done at `perMinute`: 0 when none are left, null when either is unknown. */
function secondsLeft(pending: number | null, perMinute: number | null): number | null {
  return pending === 0 ? 0 : pending !== null && perMinute ? (pending * 60) / perMinute : null;
}

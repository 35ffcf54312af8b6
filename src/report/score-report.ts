/**
 * What `kinhue score` finds, and its three renderings: an aligned text table, CSV and JSON.
 * The shapes here are the JSON format (`kind: "kinhue-score"`); keep them stable.
 */
import { toCsv } from './csv.js';
import type { LabStatistics } from './reinhard.js';
import { TABLE_RULE, formatFigure, renderTable } from './table.js';
import type { TrainingColourSource } from './training-colour.js';

/** The figures of one method on one photo (or averaged over photos). */
export interface ScoreFigures {
  /** PSNR in dB of the 8-bit sRGB result against the 8-bit original (higher is better). */
  psnr: number;
  /** Mean CIEDE2000 difference per pixel (lower is better). */
  ciede2000: number;
  /** Mean Euclidean a*b* distance per pixel (lower is better). */
  abError: number;
  /** Hasler & Suesstrunk 2003 colourfulness of the result (compare with the original's). */
  colourfulness: number;
}

/** One way of putting colour back: a baseline or a model. */
export interface ScoreMethod {
  /** Key in `figures` maps: 'grey', 'transfer:<model>' or 'model:<model>'. */
  id: string;
  /** Label in tables and CSV. */
  label: string;
  kind: 'grey' | 'transfer' | 'model';
  /** The model folder (model rows, and the transfer row whose target is that model's training set). */
  model?: string;
  /** Model rows: the weights' hash from the model folder, when it records one. */
  weightsHash?: string;
  /** Transfer rows: the target a*b* statistics and where they came from. */
  target?: { statistics: LabStatistics; source: TrainingColourSource; description: string };
}

/** One original and every method's figures on it. */
export interface PhotoScore {
  file: string;
  width: number;
  height: number;
  /** Colourfulness of the original itself. */
  originalColourfulness: number;
  /** Figures per method id. */
  figures: Record<string, ScoreFigures>;
}

/** A file that could not be scored. */
export interface ScoreFailure {
  file: string;
  code: string;
  message: string;
  hint?: string;
}

/** The whole result of a scoring run. */
export interface ScoreReport {
  kind: 'kinhue-score';
  version: string;
  created: string;
  methods: ScoreMethod[];
  photos: PhotoScore[];
  failures: ScoreFailure[];
  /** Mean over photos of each figure (each photo counts once; PSNR averaged in dB). */
  average: { originalColourfulness: number; figures: Record<string, ScoreFigures> } | null;
  /** How the figures were made, in sentences. */
  notes: string[];
}

/** Averages figures over photos, each photo counting once. */
export function averageFigures(photos: readonly PhotoScore[], methods: readonly ScoreMethod[]): ScoreReport['average'] {
  if (photos.length === 0) return null;
  const mean = (pick: (p: PhotoScore) => number): number => photos.reduce((s, p) => s + pick(p), 0) / photos.length;
  const figures: Record<string, ScoreFigures> = {};
  for (const m of methods) {
    figures[m.id] = {
      psnr: mean((p) => p.figures[m.id].psnr),
      ciede2000: mean((p) => p.figures[m.id].ciede2000),
      abError: mean((p) => p.figures[m.id].abError),
      colourfulness: mean((p) => p.figures[m.id].colourfulness),
    };
  }
  return { originalColourfulness: mean((p) => p.originalColourfulness), figures };
}

const COLUMNS = [
  { label: 'photo' },
  { label: 'method' },
  { label: 'PSNR dB', align: 'right' as const },
  { label: 'CIEDE2000', align: 'right' as const },
  { label: 'a*b* error', align: 'right' as const },
  { label: 'colourfulness', align: 'right' as const },
];

function figureCells(f: ScoreFigures): string[] {
  return [formatFigure(f.psnr, 2), formatFigure(f.ciede2000, 2), formatFigure(f.abError, 2), formatFigure(f.colourfulness, 1)];
}

function block(name: string, originalColourfulness: number, figures: Record<string, ScoreFigures>, methods: readonly ScoreMethod[]): string[][] {
  return [
    [name, 'original', '', '', '', formatFigure(originalColourfulness, 1)],
    ...methods.map((m) => ['', m.label, ...figureCells(figures[m.id])]),
  ];
}

/**
 * The report as an aligned plain-text table: per photo the original's colourfulness, then each
 * method's figures; then the averages, the failures and the notes.
 * @example
 * console.log(formatScoreTable(report));
 */
export function formatScoreTable(report: ScoreReport): string {
  const rows: (string[] | typeof TABLE_RULE)[] = [];
  for (const p of report.photos) {
    if (rows.length) rows.push(TABLE_RULE);
    rows.push(...block(p.file, p.originalColourfulness, p.figures, report.methods));
  }
  if (report.average && report.photos.length > 1) {
    rows.push(TABLE_RULE);
    rows.push(...block(`average of ${report.photos.length}`, report.average.originalColourfulness, report.average.figures, report.methods));
  }
  const parts: string[] = [];
  if (rows.length) {
    parts.push(renderTable(COLUMNS, rows));
    parts.push('PSNR: higher is better. CIEDE2000 and a*b* error: lower is better. Colourfulness: closer to the original is better.');
  } else {
    parts.push('No photo could be scored.');
  }
  if (report.failures.length) {
    parts.push(`Not scored (${report.failures.length}):\n` + report.failures.map((f) => `  ${f.file}: ${f.message}${f.hint ? `\n    next step: ${f.hint}` : ''}`).join('\n'));
  }
  if (report.notes.length) parts.push(report.notes.map((n) => `- ${n}`).join('\n'));
  return parts.join('\n\n');
}

const CSV_HEADER = ['photo', 'method', 'model', 'psnr_db', 'ciede2000_mean', 'ab_error_mean', 'colourfulness', 'original_colourfulness'];

/**
 * One CSV row per photo and method, then one per method with photo "(average)". Figures unrounded;
 * an infinite PSNR (identical images) is written as "inf".
 * @example
 * await writeFileAtomic('score.csv', scoreToCsv(report));
 */
export function scoreToCsv(report: ScoreReport): string {
  const num = (v: number): number | string => (v === Infinity ? 'inf' : v);
  const rows = (name: string, original: number, figures: Record<string, ScoreFigures>) =>
    report.methods.map((m) => {
      const f = figures[m.id];
      return [name, m.label, m.model ?? '', num(f.psnr), f.ciede2000, f.abError, f.colourfulness, original];
    });
  const body = report.photos.flatMap((p) => rows(p.file, p.originalColourfulness, p.figures));
  if (report.average) body.push(...rows('(average)', report.average.originalColourfulness, report.average.figures));
  return toCsv(CSV_HEADER, body);
}

/**
 * The report as indented JSON; an infinite PSNR (identical images) becomes the string "inf"
 * and NaN becomes null, since JSON has neither.
 * @example
 * process.stdout.write(scoreToJson(report));
 */
export function scoreToJson(report: ScoreReport): string {
  return JSON.stringify(report, (_key, value: unknown) =>
    typeof value === 'number' && !Number.isFinite(value) ? (value === Infinity ? 'inf' : null) : value, 2) + '\n';
}

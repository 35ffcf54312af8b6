/**
 * What `kinhue score` finds, and its three renderings: an aligned text table, CSV and JSON.
 * The shapes here are the JSON format (`kind: "kinhue-score"`); keep them stable.
 */
import { CLEARLY_COLOURED_CHROMA, FALSE_HUE_DEGREES, NEAR_NEUTRAL_CHROMA, RIGHT_HUE_DEGREES, meanOfPresent } from '../colour/index.js';
import { toCsv } from './csv.js';
import type { LabStatistics } from './reinhard.js';
import { TABLE_RULE, formatFigure, renderTable, type TableSpan } from './table.js';
import type { TrainingColourSource } from './training-colour.js';
import { CIEDE2000_MARGIN, RIGHT_HUE_MARGIN, type ModelVerdict } from './verdict.js';

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
  /**
   * Percent of the original's clearly coloured pixels whose result has a hue within 30 degrees
   * (colour/hue-agreement.ts; higher is better); null for a photo with no clearly coloured pixel.
   */
  rightHue: number | null;
  /** Percent of all pixels given a clear colour where the original is near-neutral or of a hue more than 60 degrees away (lower is better). */
  falseColour: number;
  /** Percent of the original's clearly coloured pixels left near-neutral (lower is better); null as rightHue. */
  leftGrey: number | null;
}

/** One way of putting colour back: a baseline or a model. */
export interface ScoreMethod {
  /** Key in `figures` maps: 'grey', 'transfer:<model>', 'model:<model>' or 'memory:<model>' (the model with the colour memory). */
  id: string;
  /** Label in tables and CSV. */
  label: string;
  kind: 'grey' | 'transfer' | 'model';
  /** The model folder (model rows, and the transfer row whose target is that model's training set). */
  model?: string;
  /** Model rows: the weights' hash from the model folder, when it records one. */
  weightsHash?: string;
  /** Model rows coloured with the colour memory: the SHA-256 of its photos and how many. */
  memory?: { sha256: string; photos: number };
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
  /** Percent of the original's pixels that are clearly coloured (the base of right hue and left grey). */
  clearlyColoured: number;
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
  /**
   * Mean over photos of each figure (each photo counts once; PSNR averaged in dB). Right hue and
   * left grey skip photos with no clearly coloured pixel: `colouredPhotos` says how many they rest on.
   */
  average: { photos: number; colouredPhotos: number; originalColourfulness: number; figures: Record<string, ScoreFigures> } | null;
  /** Per model: better, worse or no clearer than grey and each other model (report/verdict.ts). */
  verdicts: ModelVerdict[];
  /** How the figures were made, in sentences. */
  notes: string[];
}

/** Averages figures over photos, each photo counting once. */
export function averageFigures(photos: readonly PhotoScore[], methods: readonly ScoreMethod[]): ScoreReport['average'] {
  if (photos.length === 0) return null;
  const mean = (pick: (p: PhotoScore) => number): number => photos.reduce((s, p) => s + pick(p), 0) / photos.length;
  const present = (pick: (p: PhotoScore) => number | null) => meanOfPresent(photos.map(pick));
  const figures: Record<string, ScoreFigures> = {};
  for (const m of methods) {
    figures[m.id] = {
      psnr: mean((p) => p.figures[m.id].psnr),
      ciede2000: mean((p) => p.figures[m.id].ciede2000),
      abError: mean((p) => p.figures[m.id].abError),
      colourfulness: mean((p) => p.figures[m.id].colourfulness),
      rightHue: present((p) => p.figures[m.id].rightHue).mean,
      falseColour: mean((p) => p.figures[m.id].falseColour),
      leftGrey: present((p) => p.figures[m.id].leftGrey).mean,
    };
  }
  const colouredPhotos = photos.filter((p) => p.clearlyColoured > 0).length;
  return { photos: photos.length, colouredPhotos, originalColourfulness: mean((p) => p.originalColourfulness), figures };
}

/** The hue figures' definitions and thresholds, in words, for the report's notes. */
export const HUE_FIGURES_NOTE =
  `Right hue: of the original's clearly coloured pixels (C*ab >= ${CLEARLY_COLOURED_CHROMA}), the share whose result has C*ab >= ${NEAR_NEUTRAL_CHROMA} ` +
  `and a hue within ${RIGHT_HUE_DEGREES} degrees of the original's. False colour: of all pixels, the share where the result has ` +
  `C*ab >= ${CLEARLY_COLOURED_CHROMA} but the original is near-neutral (C*ab < ${NEAR_NEUTRAL_CHROMA}) or its hue differs by more than ${FALSE_HUE_DEGREES} degrees. ` +
  `Left grey: of the original's clearly coloured pixels, the share whose result has C*ab < ${NEAR_NEUTRAL_CHROMA}. Thresholds are kinhue's own.`;

const COLUMNS = [
  { label: 'photo\n  method' },
  { label: 'PSNR\ndB', align: 'right' as const },
  { label: 'CIEDE\n2000', align: 'right' as const },
  { label: 'a*b*\nerror', align: 'right' as const },
  { label: 'colour-\nfulness', align: 'right' as const },
  { label: 'right\nhue %', align: 'right' as const },
  { label: 'false\ncolour %', align: 'right' as const },
  { label: 'left\ngrey %', align: 'right' as const },
];

function figureCells(f: ScoreFigures): string[] {
  return [
    formatFigure(f.psnr, 2),
    formatFigure(f.ciede2000, 2),
    formatFigure(f.abError, 2),
    formatFigure(f.colourfulness, 1),
    formatFigure(f.rightHue, 1),
    formatFigure(f.falseColour, 1),
    formatFigure(f.leftGrey, 1),
  ];
}

function block(
  name: string,
  originalColourfulness: number,
  figures: Record<string, ScoreFigures>,
  methods: readonly ScoreMethod[],
): (string[] | TableSpan)[] {
  return [
    { span: name },
    ['  original', '', '', '', formatFigure(originalColourfulness, 1)],
    ...methods.map((m) => [`  ${m.label}`, ...figureCells(figures[m.id])]),
  ];
}

/**
 * The report as an aligned plain-text table: per photo its name, then the original's colourfulness
 * and each method's figures; then the averages, the verdicts, the failures and the notes.
 * @example
 * console.log(formatScoreTable(report));
 */
export function formatScoreTable(report: ScoreReport): string {
  const rows: (string[] | TableSpan | typeof TABLE_RULE)[] = [];
  for (const p of report.photos) {
    if (rows.length) rows.push(TABLE_RULE);
    rows.push(...block(p.file, p.originalColourfulness, p.figures, report.methods));
  }
  const average = report.average;
  if (average && report.photos.length > 1) {
    rows.push(TABLE_RULE);
    const hueBase = average.colouredPhotos === average.photos ? '' : ` (right hue and left grey: ${average.colouredPhotos})`;
    rows.push(...block(`average of ${average.photos}${hueBase}`, average.originalColourfulness, average.figures, report.methods));
  }
  const parts: string[] = [];
  if (rows.length) {
    parts.push(renderTable(COLUMNS, rows));
    parts.push(
      'Higher is better: PSNR, right hue. Lower is better: CIEDE2000, a*b* error, false colour, left grey.\n' +
        "Colourfulness: closer to the original's is better.",
    );
  } else {
    parts.push('No photo could be scored.');
  }
  if (report.verdicts.length && average) {
    parts.push(
      `Verdict (averages of ${average.photos} photo${average.photos === 1 ? '' : 's'}; under ${CIEDE2000_MARGIN} CIEDE2000 ` +
        `or ${RIGHT_HUE_MARGIN} points of right hue is no difference):\n` +
        report.verdicts.map((v) => `  ${v.text}`).join('\n'),
    );
  }
  if (report.failures.length) {
    parts.push(
      `Not scored (${report.failures.length}):\n` +
        report.failures.map((f) => `  ${f.file}: ${f.message}${f.hint ? `\n    next step: ${f.hint}` : ''}`).join('\n'),
    );
  }
  if (report.notes.length) parts.push(report.notes.map((n) => `- ${n}`).join('\n'));
  return parts.join('\n\n');
}

const CSV_HEADER = [
  'photo',
  'method',
  'model',
  'psnr_db',
  'ciede2000_mean',
  'ab_error_mean',
  'colourfulness',
  'right_hue_pct',
  'false_colour_pct',
  'left_grey_pct',
  'original_colourfulness',
  'original_clearly_coloured_pct',
];

/**
 * One CSV row per photo and method, then one per method with photo "(average)". Figures unrounded;
 * an infinite PSNR (identical images) is written as "inf", a missing right hue or left grey (no
 * clearly coloured pixel) as an empty field.
 * @example
 * await writeFileAtomic('score.csv', scoreToCsv(report));
 */
export function scoreToCsv(report: ScoreReport): string {
  const num = (v: number): number | string => (v === Infinity ? 'inf' : v);
  const rows = (name: string, original: number, coloured: number | null, figures: Record<string, ScoreFigures>) =>
    report.methods.map((m) => {
      const f = figures[m.id];
      return [
        name,
        m.label,
        m.model ?? '',
        num(f.psnr),
        f.ciede2000,
        f.abError,
        f.colourfulness,
        f.rightHue,
        f.falseColour,
        f.leftGrey,
        original,
        coloured,
      ];
    });
  const body = report.photos.flatMap((p) => rows(p.file, p.originalColourfulness, p.clearlyColoured, p.figures));
  if (report.average) body.push(...rows('(average)', report.average.originalColourfulness, null, report.average.figures));
  return toCsv(CSV_HEADER, body);
}

/**
 * The report as indented JSON; an infinite PSNR (identical images) becomes the string "inf"
 * and NaN becomes null, since JSON has neither.
 * @example
 * process.stdout.write(scoreToJson(report));
 */
export function scoreToJson(report: ScoreReport): string {
  return (
    JSON.stringify(
      report,
      (_key, value: unknown) => (typeof value === 'number' && !Number.isFinite(value) ? (value === Infinity ? 'inf' : null) : value),
      2,
    ) + '\n'
  );
}

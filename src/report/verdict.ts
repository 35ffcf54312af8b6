/**
 * The closing verdict of `score`: for each model, whether it is better, worse or no clearer than each
 * other model and than grey, on the averages of two figures (mean CIEDE2000, right hue). A difference
 * smaller than the figure's margin counts as no difference. The margins are our own, stated once here
 * and in the README.
 */
import type { ScoreFigures, ScoreMethod } from './score-report.js';

/**
 * Mean CIEDE2000 differences under this are no difference: half of the 1.0 often taken as just
 * noticeable for one pair of colours (from memory; our own choice for averages over photos).
 */
export const CIEDE2000_MARGIN = 0.5;
/** Right-hue differences under this many percentage points are no difference (our own choice). */
export const RIGHT_HUE_MARGIN = 3;

/** The figures a verdict weighs, with the direction that is better. */
const FIGURES = [
  { figure: 'ciede2000', name: 'CIEDE2000', margin: CIEDE2000_MARGIN, higherIsBetter: false, format: (v: number) => v.toFixed(2) },
  { figure: 'rightHue', name: 'right hue', margin: RIGHT_HUE_MARGIN, higherIsBetter: true, format: (v: number) => `${v.toFixed(1)}%` },
] as const;

/** How one figure of a model compares with another method's. */
export interface FigureComparison {
  figure: 'ciede2000' | 'rightHue';
  outcome: 'better' | 'worse' | 'level';
  /** The model's average and the other method's. */
  value: number;
  other: number;
}

/** A model against one other method. */
export interface Comparison {
  /** The other method's id and label. */
  against: string;
  label: string;
  outcome: 'better' | 'worse' | 'no clearer';
  /** The figures weighed (a figure no photo has, such as right hue with no clearly coloured pixel, is left out). */
  figures: FigureComparison[];
}

/** One model's verdict against grey and every other model. */
export interface ModelVerdict {
  method: string;
  label: string;
  comparisons: Comparison[];
  /** The verdict as one line of text. */
  text: string;
}

/**
 * Compares two sets of average figures: better when at least one figure is better by its margin or
 * more and none is worse by as much; worse the other way round; otherwise no clearer.
 * @example
 * compareFigures(model, grey).outcome; // 'better'
 */
export function compareFigures(mine: ScoreFigures, theirs: ScoreFigures): { outcome: Comparison['outcome']; figures: FigureComparison[] } {
  const figures: FigureComparison[] = [];
  for (const f of FIGURES) {
    const value = mine[f.figure],
      other = theirs[f.figure];
    if (value === null || other === null || !Number.isFinite(value) || !Number.isFinite(other)) continue;
    // A hair of slack so that a difference of exactly the margin in decimals (0.7 - 0.2) counts as reaching it.
    const gain = f.higherIsBetter ? value - other : other - value;
    const reach = f.margin - 1e-9;
    figures.push({ figure: f.figure, outcome: gain >= reach ? 'better' : -gain >= reach ? 'worse' : 'level', value, other });
  }
  const better = figures.some((f) => f.outcome === 'better'),
    worse = figures.some((f) => f.outcome === 'worse');
  return { outcome: better && !worse ? 'better' : worse && !better ? 'worse' : 'no clearer', figures };
}

function describeFigures(figures: readonly FigureComparison[]): string {
  const parts = figures.map((c) => {
    const f = FIGURES.find((x) => x.figure === c.figure)!;
    return `${f.name} (${f.format(c.value)} vs ${f.format(c.other)})`;
  });
  return parts.length > 1 ? `${parts.slice(0, -1).join(', ')} and ${parts[parts.length - 1]}` : (parts[0] ?? '');
}

/** One comparison in words, e.g. "better than grey on CIEDE2000 (12.10 vs 13.51)". */
function describe(c: Comparison): string {
  const of = (o: FigureComparison['outcome']) => c.figures.filter((f) => f.outcome === o);
  if (c.figures.length === 0) return `no clearer than ${c.label} (no figure to compare)`;
  if (c.outcome !== 'no clearer') {
    const level = of('level');
    return `${c.outcome} than ${c.label} on ${describeFigures(of(c.outcome))}${level.length ? `, level on ${describeFigures(level)}` : ''}`;
  }
  if (of('better').length)
    return `no clearer than ${c.label}: better on ${describeFigures(of('better'))}, worse on ${describeFigures(of('worse'))}`;
  return `no clearer than ${c.label}: ${describeFigures(c.figures)} within the margins`;
}

/**
 * A verdict per model against grey and each other model, from the averages of a score report.
 * @example
 * for (const v of modelVerdicts(report.methods, report.average.figures)) console.log(v.text);
 */
export function modelVerdicts(methods: readonly ScoreMethod[], average: Record<string, ScoreFigures>): ModelVerdict[] {
  const models = methods.filter((m) => m.kind === 'model');
  const others = methods.filter((m) => m.kind === 'grey' || m.kind === 'model');
  return models.map((model) => {
    const comparisons: Comparison[] = others
      .filter((o) => o.id !== model.id)
      .map((other) => ({
        against: other.id,
        label: other.kind === 'grey' ? 'grey' : other.label,
        ...compareFigures(average[model.id], average[other.id]),
      }));
    return { method: model.id, label: model.label, comparisons, text: `${model.label}: ${comparisons.map(describe).join('; ')}` };
  });
}

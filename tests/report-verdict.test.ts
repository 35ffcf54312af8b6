import { describe, expect, it } from 'vitest';
import {
  CIEDE2000_MARGIN,
  RIGHT_HUE_MARGIN,
  averageFigures,
  compareFigures,
  formatScoreTable,
  modelVerdicts,
  type PhotoScore,
  type ScoreFigures,
  type ScoreMethod,
  type ScoreReport,
} from '../src/report/index.js';

// The closing verdict of `score`, on synthetic reports whose averages are written out here. The
// margins are kinhue's own (0.5 CIEDE2000, 3 points of right hue); the values below are chosen to
// sit exactly on them or just either side.

function figures(ciede2000: number, rightHue: number | null): ScoreFigures {
  return {
    psnr: 20,
    ciede2000,
    abError: 10,
    colourfulness: 20,
    rightHue,
    falseColour: 2,
    leftGrey: rightHue === null ? null : 100 - rightHue,
  };
}

const METHODS: ScoreMethod[] = [
  { id: 'grey', label: 'grey (L* only)', kind: 'grey' },
  { id: 'transfer:1', label: 'Reinhard transfer (base)', kind: 'transfer' },
  { id: 'model:1', label: 'model base', kind: 'model' },
  { id: 'transfer:2', label: 'Reinhard transfer (family)', kind: 'transfer' },
  { id: 'model:2', label: 'model family', kind: 'model' },
];

describe('compareFigures', () => {
  it('takes a difference of exactly the margin as a difference, and less as none', () => {
    expect([CIEDE2000_MARGIN, RIGHT_HUE_MARGIN]).toEqual([0.5, 3]);
    // 12.5 vs 13 (0.5 lower: better), 40 vs 37 (3 higher: better).
    expect(compareFigures(figures(12.5, 40), figures(13, 37))).toEqual({
      outcome: 'better',
      figures: [
        { figure: 'ciede2000', outcome: 'better', value: 12.5, other: 13 },
        { figure: 'rightHue', outcome: 'better', value: 40, other: 37 },
      ],
    });
    // 0.7 - 0.2 and 4.1 - 1.1 are 0.5 and 3 in decimals, a hair less in binary floating point: they reach the margins.
    expect(compareFigures(figures(0.2, 37), figures(0.7, 37)).outcome).toBe('better');
    expect(compareFigures(figures(13, 4.1), figures(13, 1.1)).outcome).toBe('better');
    // 12.75 vs 13 and 39 vs 37: both within the margins.
    expect(compareFigures(figures(12.75, 39), figures(13, 37)).outcome).toBe('no clearer');
    // Worse on both.
    expect(compareFigures(figures(13.5, 34), figures(13, 37)).outcome).toBe('worse');
  });

  it('is better when one figure is better and the other level, no clearer when they disagree', () => {
    expect(compareFigures(figures(13, 45), figures(13.25, 37)).outcome).toBe('better');
    expect(compareFigures(figures(14, 45), figures(13, 37)).outcome).toBe('no clearer');
    expect(compareFigures(figures(14, 38), figures(13, 37)).outcome).toBe('worse');
  });

  it('leaves out a figure that one side lacks', () => {
    // No clearly coloured pixel in any photo: right hue is missing, CIEDE2000 decides alone.
    const c = compareFigures(figures(12, null), figures(13, null));
    expect(c.outcome).toBe('better');
    expect(c.figures.map((f) => f.figure)).toEqual(['ciede2000']);
  });
});

describe('modelVerdicts', () => {
  it('gives each model one line against grey and every other model, never against the transfer rows', () => {
    const average = {
      grey: figures(13.51, 0),
      'transfer:1': figures(12, 50),
      'model:1': figures(13.2, 31),
      'transfer:2': figures(12, 50),
      'model:2': figures(12.1, 40),
    };
    const verdicts = modelVerdicts(METHODS, average);
    expect(verdicts.map((v) => v.method)).toEqual(['model:1', 'model:2']);
    expect(verdicts[0].comparisons.map((c) => [c.against, c.outcome])).toEqual([
      ['grey', 'better'],
      ['model:2', 'worse'],
    ]);
    expect(verdicts[1].comparisons.map((c) => [c.against, c.outcome])).toEqual([
      ['grey', 'better'],
      ['model:1', 'better'],
    ]);
    expect(verdicts[0].text).toBe(
      'model base: better than grey on right hue (31.0% vs 0.0%), level on CIEDE2000 (13.20 vs 13.51); ' +
        'worse than model family on CIEDE2000 (13.20 vs 12.10) and right hue (31.0% vs 40.0%)',
    );
    expect(verdicts[1].text).toBe(
      'model family: better than grey on CIEDE2000 (12.10 vs 13.51) and right hue (40.0% vs 0.0%); ' +
        'better than model base on CIEDE2000 (12.10 vs 13.20) and right hue (40.0% vs 31.0%)',
    );
  });

  it('says which figures disagree, or that all are within the margins', () => {
    const methods = METHODS.slice(0, 3);
    const mixed = modelVerdicts(methods, { grey: figures(13, 0), 'transfer:1': figures(12, 50), 'model:1': figures(14, 20) });
    expect(mixed[0].text).toBe(
      'model base: no clearer than grey: better on right hue (20.0% vs 0.0%), worse on CIEDE2000 (14.00 vs 13.00)',
    );
    const level = modelVerdicts(methods, { grey: figures(13, 0), 'transfer:1': figures(12, 50), 'model:1': figures(12.8, 2) });
    expect(level[0].text).toBe(
      'model base: no clearer than grey: CIEDE2000 (12.80 vs 13.00) and right hue (2.0% vs 0.0%) within the margins',
    );
  });

  it('follows the averages of a report and closes its table', () => {
    // Two photos; the second has no clearly coloured pixel, so right hue averages rest on the first alone.
    const photo = (file: string, grey: ScoreFigures, model: ScoreFigures, clearlyColoured: number): PhotoScore => ({
      file,
      width: 2,
      height: 2,
      originalColourfulness: 30,
      clearlyColoured,
      figures: { grey, 'transfer:1': figures(15, 10), 'model:1': model },
    });
    const photos = [photo('a.jpg', figures(14, 0), figures(12, 60), 50), photo('b.jpg', figures(6, null), figures(7.4, null), 0)];
    const methods = METHODS.slice(0, 3);
    const average = averageFigures(photos, methods)!;
    expect(average).toMatchObject({ photos: 2, colouredPhotos: 1 });
    expect(average.figures['model:1'].ciede2000).toBeCloseTo(9.7, 12);
    expect(average.figures['model:1'].rightHue).toBe(60);
    expect(average.figures['model:1'].leftGrey).toBe(40);
    const report: ScoreReport = {
      kind: 'kinhue-score',
      version: '0',
      created: '',
      methods,
      photos,
      failures: [],
      average,
      verdicts: modelVerdicts(methods, average.figures),
      notes: [],
    };
    // Grey averages 10 (14 and 6), the model 9.7 (12 and 7.4): within 0.5, so right hue (60 vs 0) decides.
    expect(report.verdicts[0].comparisons[0].outcome).toBe('better');
    const table = formatScoreTable(report);
    expect(table).toContain('average of 2 (right hue and left grey: 1)');
    expect(table).toMatch(
      /Verdict \(averages of 2 photos;[^\n]*\n {2}model base: better than grey on right hue \(60\.0% vs 0\.0%\), level on CIEDE2000 \(9\.70 vs 10\.00\)$/m,
    );
  });
});

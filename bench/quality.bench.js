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
const kinhue = await import('kinhue');
const modelDir = process.env.KINHUE_MODEL ?? kinhue.DEFAULT_MODEL_DIR;
await kinhue.initBackend();

const summary = JSON.parse(await readFile(join(modelDir, 'training-summary.json'), 'utf8').catch(() => '{}'));
const exists = (file) =>
  stat(file).then(
    () => true,
    () => false,
  );
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
  console.log(
    `${label}: ${r.average.photos} photos (right hue and left grey over ${r.average.colouredPhotos}), originals' colourfulness ${f(r.average.originalColourfulness, 1)}, ${f((Date.now() - started) / 1000, 0)} s`,
  );
  console.log('  method            CIEDE2000  PSNR dB  colourful  right hue  false colour  left grey');
  for (const m of r.methods) {
    const g = r.average.figures[m.id];
    console.log(
      `  ${m.label.slice(0, 16).padEnd(16)} ${f(g.ciede2000).padStart(10)} ${f(g.psnr).padStart(8)} ${f(g.colourfulness, 1).padStart(10)} ${f(g.rightHue, 1).padStart(9)}% ${f(g.falseColour, 1).padStart(11)}% ${f(g.leftGrey, 1).padStart(9)}%`,
    );
  }
  const model = r.average.figures[r.methods.find((m) => m.kind === 'model').id];
  const grey = r.average.figures[r.methods.find((m) => m.kind === 'grey').id];
  const goal = (text, met) => console.log(`  goal ${met ? 'met    ' : 'not met'} ${text}`);
  goal(
    `right hue >= 55% and false colour <= 4% (${f(model.rightHue, 1)}%, ${f(model.falseColour, 1)}%)`,
    model.rightHue >= 55 && model.falseColour <= 4,
  );
  goal(`PSNR >= grey + 2.5 dB (grey ${model.psnr >= grey.psnr ? '+' : ''}${f(model.psnr - grey.psnr)} dB)`, model.psnr - grey.psnr >= 2.5);
  goal(`colourfulness >= 35 (${f(model.colourfulness, 1)})`, model.colourfulness >= 35);
  goal(`mean CIEDE2000 not above grey (${f(model.ciede2000)} against ${f(grey.ciede2000)})`, model.ciede2000 <= grey.ciede2000);
}

console.log(`model: ${modelDir}`);
await report('demo album', [join(root, 'demo-photos', 'originals')]);
await report('held-out photos', heldOut);

// Colour hints and reference photographs with this model, on the demo album's colour originals (held out of
// the shipped model's training): each photo taken to L* and coloured as restore colours a scan.
// Hints: 10 spots, one at random in each cell of a 5 x 2 grid (seeded), each with the original's colour
// there and a radius of 1% of the long side; PSNR in dB (8-bit RGB, full size), the model alone -> with hints.
// Reference: the scan is the right and upper part of a photograph, the reference the left and lower part in
// colour; mean a*b* error against the original, the model alone -> with the reference.
const internals = {
  ...(await import(join(root, 'dist', 'batch', 'index.js'))),
  ...(await import(join(root, 'dist', 'colour', 'index.js'))),
  ...(await import(join(root, 'dist', 'hints', 'index.js'))),
  ...(await import(join(root, 'dist', 'image', 'index.js'))),
};
const { mkdtemp, writeFile } = await import('node:fs/promises');
const { tmpdir } = await import('node:os');
const { readdirSync } = await import('node:fs');
const sharp = (await import('sharp')).default;
const model = await kinhue.loadModel(modelDir);
const originals = join(root, 'demo-photos', 'originals');
const workSize = model.meta.workingSize;
const rnd = (await import(join(root, 'dist', 'random.js'))).seededUniform(7);
const rgbOf = (px) => {
  const out = new Uint8Array(px.width * px.height * 3);
  for (let i = 0; i < px.width * px.height; i++) for (let c = 0; c < 3; c++) out[i * 3 + c] = px.data[i * px.channels + c];
  return out;
};
console.log('hints and reference photographs on the demo originals');
console.log('  photo                              PSNR alone  with hints   a*b* error alone  with reference');
for (const name of readdirSync(originals)
  .filter((f) => f.endsWith('.jpg'))
  .sort()) {
  const file = join(originals, name);
  const { pixels } = await internals.decodeImage(file);
  const W = pixels.width,
    H = pixels.height,
    n = W * H;
  const original = rgbOf(pixels);
  const { L } = internals.srgbToLab(original, 3);
  const { width: w, height: h } = internals.workingSize(W, H, workSize);
  const small = internals.labToSrgb(internals.srgbToLab(internals.areaMean(pixels, w, h).data, 3), new Uint8Array(w * h * 3), 3);
  const entries = [];
  for (let gy = 0; gy < 2; gy++) {
    for (let gx = 0; gx < 5; gx++) {
      const x = Math.floor(((gx + rnd()) * w) / 5),
        y = Math.floor(((gy + rnd()) * h) / 2),
        i = y * w + x;
      entries.push({
        x: Math.floor(((x + 0.5) * W) / w),
        y: Math.floor(((y + 0.5) * H) / h),
        colour: internals.formatHex([small[i * 3], small[i * 3 + 1], small[i * 3 + 2]]),
        radius: Math.round(Math.max(W, H) / 100),
      });
    }
  }
  const dir = await mkdtemp(join(tmpdir(), 'kinhue-quality-'));
  const hintsFile = { format: 'kinhue-hints', version: 1, image: { width: W, height: H }, entries };
  await writeFile(join(dir, name.replace(/\.jpg$/, '.hints.json')), JSON.stringify(hintsFile));
  const hints = await internals.prepareGuidance(join(dir, name), W, H);
  const rgb = (a, b) => internals.labToSrgb({ L, a, b }, new Uint8Array(n * 3), 3);
  const alone = await kinhue.colouriseLightness(L, W, H, model, { workSize });
  const hinted = await kinhue.colouriseLightness(L, W, H, model, { workSize, guides: hints.guides });

  const refPath = join(dir, 'reference.png');
  const top = Math.round(H * 0.15);
  await sharp(file)
    .extract({ left: 0, top, width: Math.round(W * 0.7), height: H - top })
    .png()
    .toFile(refPath);
  const left = Math.round(W * 0.3),
    sh = Math.round(H * 0.85),
    sw = W - left;
  const scan = new Uint8Array(sw * sh * 3);
  for (let y = 0; y < sh; y++) scan.set(original.subarray((y * W + left) * 3, (y * W + W) * 3), y * sw * 3);
  const truth = internals.srgbToLab(scan, 3);
  const reference = await internals.prepareGuidance(join(dir, 'scan.png'), sw, sh, { reference: refPath });
  const plain = await kinhue.colouriseLightness(truth.L, sw, sh, model, { workSize });
  const guided = await kinhue.colouriseLightness(truth.L, sw, sh, model, { workSize, guides: reference.guides });
  const error = (c) => internals.meanAbError({ L: truth.L, a: c.a, b: c.b }, truth);
  console.log(
    `  ${name.slice(0, 32).padEnd(32)} ${f(internals.psnr(rgb(alone.a, alone.b), original)).padStart(11)} ${f(internals.psnr(rgb(hinted.a, hinted.b), original)).padStart(11)} ${f(error(plain)).padStart(18)} ${f(error(guided)).padStart(15)}`,
  );
}
model.network.dispose();

// Speed and memory of image input and output (sharp/libvips plus kinhue's own steps) on a
// 24-megapixel scan-sized image: decode, encode, tone classification. libvips may use more than
// one thread; the figures are wall-clock. Imports dist/image/ and dist/colour/ only.
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { srgbToLab } from '../dist/colour/index.js';
import { seededUniform } from '../dist/random.js';
import { classifyTone, decodeImage, encodeImage } from '../dist/image/index.js';

const WIDTH = 6000,
  HEIGHT = 4000;
const MP = (WIDTH * HEIGHT) / 1e6;
const dir = await mkdtemp(join(tmpdir(), 'kinhue-bench-image-'));

async function measure(label, fn, repeats = 3) {
  const times = [];
  for (let r = 0; r < repeats; r++) {
    const t0 = process.hrtime.bigint();
    await fn();
    times.push(Number(process.hrtime.bigint() - t0) / 1e9);
  }
  times.sort((a, b) => a - b);
  const rss = process.memoryUsage().rss / 1e6;
  console.log(
    `${label.padEnd(40)} best ${(MP / times[0]).toFixed(1).padStart(6)} MP/s  (${times[0].toFixed(2)} s)   rss ${rss.toFixed(0)} MB`,
  );
}

try {
  // A smooth 16-bit grey field with noise, like a scanned print.
  const grey16 = new Uint16Array(WIDTH * HEIGHT);
  const next = seededUniform(2463534242);
  for (let y = 0, i = 0; y < HEIGHT; y++) {
    for (let x = 0; x < WIDTH; x++, i++) {
      grey16[i] = Math.min(65535, (((x + y) * 6) % 60000) + Math.floor(next() * 2048));
    }
  }
  const tif = join(dir, 'scan16.tif');
  await sharp(grey16, { raw: { width: WIDTH, height: HEIGHT, channels: 1 } })
    .toColourspace('grey16')
    .tiff({ compression: 'deflate' })
    .toFile(tif);
  const jpg = join(dir, 'photo.jpg');
  await sharp(grey16, { raw: { width: WIDTH, height: HEIGHT, channels: 1 } })
    .toColourspace('srgb')
    .jpeg({ quality: 92 })
    .toFile(jpg);

  console.log(
    `image ${WIDTH} x ${HEIGHT} (${MP} MP), node ${process.version}, libvips ${sharp.versions.vips}, ${sharp.concurrency()} libvips threads`,
  );
  let decoded16, decoded8;
  await measure('decode 16-bit grey TIFF (deflate)', async () => {
    decoded16 = await decodeImage(tif);
  });
  await measure('decode 8-bit RGB JPEG', async () => {
    decoded8 = await decodeImage(jpg);
  });
  await measure('encode 16-bit grey TIFF (deflate)', () => encodeImage(decoded16.pixels, join(dir, 'out16.tif'), { format: 'tiff' }));
  await measure('encode 8-bit RGB JPEG q92 4:4:4', () => encodeImage(decoded8.pixels, join(dir, 'out.jpg'), { format: 'jpeg' }));
  await measure('encode 8-bit RGB PNG', () => encodeImage(decoded8.pixels, join(dir, 'out.png'), { format: 'png' }), 1);
  const lab = srgbToLab(decoded8.pixels.data, 3);
  await measure('classifyTone (CIELAB planes given)', async () => {
    classifyTone(lab);
  });
} finally {
  await rm(dir, { recursive: true, force: true });
}

import { mkdir } from 'node:fs/promises';
import { join } from 'node:path';
import sharp from 'sharp';

/**
 * Writes `count` colour photos in miniature, 64 x 48 PNGs, sky above and grass below, each a little
 * different (our own test images): enough for a training run's crops, validation and held-out photos.
 */
export async function writeSkyGrassPhotos(folder: string, count = 6): Promise<string> {
  await mkdir(folder, { recursive: true });
  for (let k = 0; k < count; k++) {
    const w = 64;
    const h = 48;
    const data = Buffer.alloc(w * h * 3);
    for (let i = 0; i < w * h; i++) data.set(i < (w * h) / 2 ? [90 + 20 * k, 150, 230] : [70, 140 - 10 * k, 60], i * 3);
    await sharp(data, { raw: { width: w, height: h, channels: 3 } })
      .png()
      .toFile(join(folder, `p${k}.png`));
  }
  return folder;
}

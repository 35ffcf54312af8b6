import sharp from 'sharp';

/**
 * Writes a small 8-bit grey PNG scan: a gradient with a disc, something with edges; `shade` moves the
 * disc's grey, so scans made with different shades are different photographs.
 */
export async function greyPng(path: string, w = 64, h = 48, shade = 0): Promise<void> {
  const v = new Uint8Array(w * h);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) v[y * w + x] = Math.hypot(x - w / 3, y - h / 2) < h / 4 ? 50 + shade : 90 + ((x + y) % 120);
  await sharp(v, { raw: { width: w, height: h, channels: 1 } })
    .png()
    .toFile(path);
}

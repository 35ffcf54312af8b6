/**
 * The colourfulness metric of D. Hasler and S. Suesstrunk, "Measuring colourfulness in natural
 * images", Proc. SPIE 5007, 2003: M = sigma_rgyb + 0.3 mu_rgyb over the opponent channels
 * rg = R - G and yb = (R + G) / 2 - B, on 0-255 values.
 */
import type { PixelData } from './lab.js';

/**
 * Colourfulness of interleaved sRGB data, on the paper's 0-255 scale whatever the input depth
 * (0 for grey; about 15 slightly, 33 moderately, 59 quite, 109 extremely colourful).
 * @example
 * colourfulness(new Uint8Array([255, 0, 0, 0, 0, 255]), 3); // 2-pixel red/blue image
 */
export function colourfulness(data: PixelData, channels: 3 | 4): number {
  if (channels !== 3 && channels !== 4) throw new RangeError(`colourfulness: channels must be 3 or 4, got ${channels}`);
  if (data.length % channels !== 0) {
    throw new RangeError(`colourfulness: data length ${data.length} is not a multiple of ${channels} channels`);
  }
  const n = data.length / channels;
  if (n === 0) return 0;
  const scale = data instanceof Uint8Array ? 1 : data instanceof Uint16Array ? 255 / 65535 : 255;
  // Sums shifted by the first pixel's values keep the variance exact for near-constant images.
  const rg0 = (data[0] - data[1]) * scale;
  const yb0 = ((data[0] + data[1]) / 2 - data[2]) * scale;
  let srg = 0,
    syb = 0,
    srg2 = 0,
    syb2 = 0;
  for (let j = 0; j < data.length; j += channels) {
    const r = data[j],
      g = data[j + 1],
      b = data[j + 2];
    const rg = (r - g) * scale - rg0;
    const yb = ((r + g) / 2 - b) * scale - yb0;
    srg += rg;
    syb += yb;
    srg2 += rg * rg;
    syb2 += yb * yb;
  }
  const mrg = srg / n,
    myb = syb / n;
  const varRg = Math.max(0, srg2 / n - mrg * mrg);
  const varYb = Math.max(0, syb2 / n - myb * myb);
  const meanRg = mrg + rg0,
    meanYb = myb + yb0;
  return Math.sqrt(varRg + varYb) + 0.3 * Math.sqrt(meanRg * meanRg + meanYb * meanYb);
}

/**
 * The confidence distribution of one result as a small inline SVG bar chart, so a reviewer can
 * see at a glance whether a photo is mostly sure colour or mostly guesswork.
 */

/**
 * Counts 8-bit grey values (white = confident) into `bins` equal bins over 0-255; returns
 * fractions of the pixel count (summing to 1). Channels beyond the first are ignored.
 * @example
 * confidenceHistogram(new Uint8Array([0, 255, 255, 128]), 1, 4); // [0.25, 0, 0.25, 0.5]
 */
export function confidenceHistogram(data: Uint8Array, channels: number, bins = 10): number[] {
  const counts = new Array<number>(bins).fill(0);
  const n = Math.floor(data.length / channels);
  if (n === 0) return counts;
  for (let j = 0; j < data.length; j += channels) counts[Math.min(bins - 1, Math.floor((data[j] * bins) / 256))]++;
  return counts.map((c) => c / n);
}

/** Mean of 8-bit grey values as a confidence in 0-1. */
export function meanConfidenceOf(data: Uint8Array, channels: number): number {
  let sum = 0;
  const n = Math.floor(data.length / channels);
  for (let j = 0; j < data.length; j += channels) sum += data[j];
  return n === 0 ? NaN : sum / n / 255;
}

const WIDTH = 200;
const HEIGHT = 56;
const AXIS = 14;

/**
 * An SVG bar chart of histogram fractions over confidence 0-1 (low confidence on the left, bars
 * shaded from warm to cool by confidence); each bar carries a tooltip with its range and share.
 * @example
 * histogramSvg([0.1, 0.2, 0.7]); // '<svg ...>...</svg>'
 */
export function histogramSvg(fractions: readonly number[]): string {
  const bins = fractions.length;
  const peak = Math.max(...fractions, 1e-9);
  const barWidth = WIDTH / bins;
  const plot = HEIGHT - AXIS;
  const bars = fractions
    .map((f, i) => {
      const h = Math.max(f > 0 ? 1 : 0, (f / peak) * (plot - 2));
      const lo = (i / bins).toFixed(1),
        hi = ((i + 1) / bins).toFixed(1);
      const shade = barShade((i + 0.5) / bins);
      return (
        `<rect x="${(i * barWidth + 1).toFixed(1)}" y="${(plot - h).toFixed(1)}" width="${(barWidth - 2).toFixed(1)}" ` +
        `height="${h.toFixed(1)}" fill="${shade}"><title>confidence ${lo} to ${hi}: ${(f * 100).toFixed(1)}% of pixels</title></rect>`
      );
    })
    .join('');
  return (
    `<svg class="hist" role="img" viewBox="0 0 ${WIDTH} ${HEIGHT}" width="${WIDTH}" height="${HEIGHT}" ` +
    `aria-label="confidence distribution">${bars}` +
    `<line x1="0" y1="${plot + 0.5}" x2="${WIDTH}" y2="${plot + 0.5}" stroke="#8a8f98" stroke-width="1"/>` +
    `<text x="0" y="${HEIGHT - 2}">unsure</text><text x="${WIDTH}" y="${HEIGHT - 2}" text-anchor="end">sure</text></svg>`
  );
}

/** Bar colour: a warm ochre for low confidence through to a calm teal for high. */
function barShade(t: number): string {
  const from = [196, 120, 52],
    to = [44, 122, 123];
  const c = from.map((v, k) => Math.round(v + (to[k] - v) * t));
  return `rgb(${c[0]},${c[1]},${c[2]})`;
}

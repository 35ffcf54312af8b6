/**
 * Grey-level morphology and box filters on float planes: minimum and maximum over a square window by
 * the van Herk / Gil-Werman algorithm (three comparisons per pixel whatever the window), run along
 * rows then columns; box means by running sums. Edges repeat the border pixel.
 */

/** Minimum (erosion) or maximum (dilation) over a (2r+1)-pixel square window. */
export function squareFilter(src: Float32Array, w: number, h: number, r: number, op: 'min' | 'max'): Float32Array {
  const tmp = new Float32Array(w * h);
  const out = new Float32Array(w * h);
  const line = new Float32Array(Math.max(w, h) + 2 * r);
  const g = new Float32Array(line.length);
  const hh = new Float32Array(line.length);
  const pass = (from: Float32Array, to: Float32Array, n: number, count: number, step: number, stride: number): void => {
    for (let c = 0; c < count; c++) {
      const base = c * stride;
      for (let i = 0; i < n + 2 * r; i++) line[i] = from[base + Math.min(n - 1, Math.max(0, i - r)) * step]!;
      lineFilter(line, n + 2 * r, 2 * r + 1, g, hh, op);
      for (let i = 0; i < n; i++) to[base + i * step] = op === 'min' ? Math.min(hh[i]!, g[i + 2 * r]!) : Math.max(hh[i]!, g[i + 2 * r]!);
    }
  };
  pass(src, tmp, w, h, 1, w);
  pass(tmp, out, h, w, w, 1);
  return out;
}

/** Forward (g) and backward (h) running extremes within blocks of length k. */
function lineFilter(line: Float32Array, n: number, k: number, g: Float32Array, h: Float32Array, op: 'min' | 'max'): void {
  const better = op === 'min' ? (a: number, b: number) => (a < b ? a : b) : (a: number, b: number) => (a > b ? a : b);
  for (let i = 0; i < n; i++) g[i] = i % k === 0 ? line[i]! : better(g[i - 1]!, line[i]!);
  for (let i = n - 1; i >= 0; i--) h[i] = i === n - 1 || (i + 1) % k === 0 ? line[i]! : better(h[i + 1]!, line[i]!);
}

/** Opening (erosion then dilation): removes bright details narrower than the window. */
export function opening(src: Float32Array, w: number, h: number, r: number): Float32Array {
  return squareFilter(squareFilter(src, w, h, r, 'min'), w, h, r, 'max');
}

/** Closing (dilation then erosion): removes dark details narrower than the window. */
export function closing(src: Float32Array, w: number, h: number, r: number): Float32Array {
  return squareFilter(squareFilter(src, w, h, r, 'max'), w, h, r, 'min');
}

/** Mean over a (2r+1)-pixel square window (edges repeat the border). */
export function boxMean(src: Float32Array, w: number, h: number, r: number): Float32Array {
  const tmp = new Float32Array(w * h);
  const out = new Float32Array(w * h);
  const k = 2 * r + 1;
  const pass = (from: Float32Array, to: Float32Array, n: number, count: number, step: number, stride: number): void => {
    for (let c = 0; c < count; c++) {
      const base = c * stride;
      const at = (i: number): number => from[base + Math.min(n - 1, Math.max(0, i)) * step]!;
      let sum = 0;
      for (let i = -r; i <= r; i++) sum += at(i);
      for (let i = 0; i < n; i++) {
        to[base + i * step] = sum / k;
        sum += at(i + r + 1) - at(i - r);
      }
    }
  };
  pass(src, tmp, w, h, 1, w);
  pass(tmp, out, h, w, w, 1);
  return out;
}

/** A 0/1 mask grown by `r` pixels (square window). */
export function dilateMask(mask: Uint8Array, w: number, h: number, r: number): Uint8Array {
  if (r <= 0) return Uint8Array.from(mask);
  const grown = squareFilter(Float32Array.from(mask), w, h, r, 'max');
  return Uint8Array.from(grown, (v) => (v > 0 ? 1 : 0));
}

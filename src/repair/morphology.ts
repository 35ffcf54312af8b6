/**
 * Grey-level morphology and box filters on float planes: minimum and maximum over a square window by
 * the van Herk / Gil-Werman algorithm (three comparisons per pixel whatever the window), run along
 * rows then columns; box means by running sums. Edges repeat the border pixel.
 */

/**
 * Minimum (erosion) or maximum (dilation) over a (2r+1)-pixel square window. The row pass runs along
 * each row; the column pass runs over whole rows at a time, so both read memory in order.
 */
export function squareFilter(src: Float32Array, w: number, h: number, r: number, op: 'min' | 'max'): Float32Array {
  const k = 2 * r + 1;
  // Maximum is the minimum of the negated values: one set of loops serves both.
  const sign = op === 'min' ? 1 : -1;
  const tmp = new Float32Array(w * h);
  const m = w + 2 * r;
  const line = new Float32Array(m);
  const g = new Float32Array(m);
  const back = new Float32Array(m);
  for (let y = 0; y < h; y++) {
    const base = y * w;
    const first = sign * src[base]!;
    const last = sign * src[base + w - 1]!;
    for (let i = 0; i < r; i++) {
      line[i] = first;
      line[m - 1 - i] = last;
    }
    for (let i = 0; i < w; i++) line[i + r] = sign * src[base + i]!;
    runningMinima(line, m, k, g, back);
    for (let i = 0; i < w; i++) {
      const a = back[i]!;
      const b = g[i + 2 * r]!;
      tmp[base + i] = a < b ? a : b;
    }
  }
  // Columns: the padded rows -r..h-1+r, whole rows at a time.
  const rows = h + 2 * r;
  const G = new Float32Array(rows * w);
  const B = new Float32Array(rows * w);
  const rowOf = (i: number): number => Math.min(h - 1, Math.max(0, i - r)) * w;
  for (let b0 = 0; b0 < rows; b0 += k) {
    const b1 = Math.min(rows, b0 + k);
    G.set(tmp.subarray(rowOf(b0), rowOf(b0) + w), b0 * w);
    for (let i = b0 + 1; i < b1; i++) {
      const src0 = rowOf(i);
      const prev = (i - 1) * w;
      const at = i * w;
      for (let x = 0; x < w; x++) {
        const v = tmp[src0 + x]!;
        const p = G[prev + x]!;
        G[at + x] = v < p ? v : p;
      }
    }
    B.set(tmp.subarray(rowOf(b1 - 1), rowOf(b1 - 1) + w), (b1 - 1) * w);
    for (let i = b1 - 2; i >= b0; i--) {
      const src0 = rowOf(i);
      const next = (i + 1) * w;
      const at = i * w;
      for (let x = 0; x < w; x++) {
        const v = tmp[src0 + x]!;
        const p = B[next + x]!;
        B[at + x] = v < p ? v : p;
      }
    }
  }
  const out = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    const lo = y * w;
    const hi = (y + 2 * r) * w;
    for (let x = 0; x < w; x++) {
      const a = B[lo + x]!;
      const b = G[hi + x]!;
      out[lo + x] = sign * (a < b ? a : b);
    }
  }
  return out;
}

/** Van Herk / Gil-Werman running minima within blocks of length k: forward into g, backward into back. */
function runningMinima(line: Float32Array, m: number, k: number, g: Float32Array, back: Float32Array): void {
  for (let b0 = 0; b0 < m; b0 += k) {
    const b1 = Math.min(m, b0 + k);
    let run = line[b0]!;
    g[b0] = run;
    for (let i = b0 + 1; i < b1; i++) {
      const v = line[i]!;
      if (v < run) run = v;
      g[i] = run;
    }
    run = line[b1 - 1]!;
    back[b1 - 1] = run;
    for (let i = b1 - 2; i >= b0; i--) {
      const v = line[i]!;
      if (v < run) run = v;
      back[i] = run;
    }
  }
}

/** Opening (erosion then dilation): removes bright details narrower than the window. */
export function opening(src: Float32Array, w: number, h: number, r: number): Float32Array {
  return squareFilter(squareFilter(src, w, h, r, 'min'), w, h, r, 'max');
}

/** Closing (dilation then erosion): removes dark details narrower than the window. */
export function closing(src: Float32Array, w: number, h: number, r: number): Float32Array {
  return squareFilter(squareFilter(src, w, h, r, 'max'), w, h, r, 'min');
}

/** Mean over a (2r+1)-pixel square window (edges repeat the border), by running sums. */
export function boxMean(src: Float32Array, w: number, h: number, r: number): Float32Array {
  const k = 2 * r + 1;
  const tmp = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    const base = y * w;
    let sum = 0;
    for (let i = -r; i <= r; i++) sum += src[base + (i < 0 ? 0 : i >= w ? w - 1 : i)]!;
    for (let x = 0; x < w; x++) {
      tmp[base + x] = sum / k;
      const add = x + r + 1;
      const drop = x - r;
      sum += src[base + (add >= w ? w - 1 : add)]! - src[base + (drop < 0 ? 0 : drop)]!;
    }
  }
  // Columns: a running sum per column, a whole row at a time.
  const out = new Float32Array(w * h);
  const sums = new Float64Array(w);
  const row = (y: number): number => (y < 0 ? 0 : y >= h ? h - 1 : y) * w;
  for (let i = -r; i <= r; i++) {
    const at = row(i);
    for (let x = 0; x < w; x++) sums[x] += tmp[at + x]!;
  }
  for (let y = 0; y < h; y++) {
    const at = y * w;
    const add = row(y + r + 1);
    const drop = row(y - r);
    for (let x = 0; x < w; x++) {
      out[at + x] = sums[x]! / k;
      sums[x] += tmp[add + x]! - tmp[drop + x]!;
    }
  }
  return out;
}

/** A 0/1 mask grown by `r` pixels (square window), by running counts along rows then columns. */
export function dilateMask(mask: Uint8Array, w: number, h: number, r: number): Uint8Array {
  if (r <= 0) return mask.slice();
  const tmp = new Uint8Array(w * h);
  const out = new Uint8Array(w * h);
  const pass = (from: Uint8Array, to: Uint8Array, n: number, count: number, step: number, stride: number): void => {
    for (let c = 0; c < count; c++) {
      const base = c * stride;
      let ones = 0;
      for (let i = 0; i < Math.min(r, n); i++) ones += from[base + i * step]!;
      for (let i = 0, j = base; i < n; i++, j += step) {
        if (i + r < n) ones += from[base + (i + r) * step]!;
        if (i - r - 1 >= 0) ones -= from[base + (i - r - 1) * step]!;
        to[j] = ones > 0 ? 1 : 0;
      }
    }
  };
  pass(mask, tmp, w, h, 1, w);
  pass(tmp, out, h, w, w, 1);
  return out;
}

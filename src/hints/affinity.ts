/**
 * The pixel graph of Levin, Lischinski & Weiss (2004), "Colorization using Optimization": each pixel is
 * joined to its 8 neighbours with a weight that falls with their difference in luminance, so colour flows
 * freely through even regions and hardly at all across edges.
 */

/** Symmetric weights of an 8-connected grid, stored once per edge on its first pixel (row-major). */
export interface Affinity {
  width: number;
  height: number;
  /** Edge (x, y)-(x+1, y). */
  east: Float32Array;
  /** Edge (x, y)-(x, y+1). */
  south: Float32Array;
  /** Edge (x, y)-(x+1, y+1). */
  southEast: Float32Array;
  /** Edge (x, y)-(x-1, y+1). */
  southWest: Float32Array;
}

// From the authors' published code (getColorExact.m, from memory): 2 sigma^2 = 0.6 x the variance of the 3x3
// window, raised so that the most similar neighbour keeps a weight of at least 0.01, and never below 2e-6
// (intensities 0-1).
const VARIANCE_SCALE = 0.6;
const MIN_NEIGHBOUR_WEIGHT = 0.01;
const MIN_SPREAD = 2e-6;

/**
 * Levin et al. weights for an L* plane (0-100): w_rs = exp(-(Y_r - Y_s)^2 / 2 sigma^2) with 2 sigma^2 the mean of
 * the two pixels' local spreads. The paper's weights are per pixel (sigma_r) and not symmetric; averaging
 * the spreads makes them symmetric, so that the system is positive definite and conjugate gradients apply,
 * while each pixel still equals the weighted mean of its neighbours at the solution.
 *
 * @example
 *   const graph = levinAffinity(lab.L, width, height);
 */
export function levinAffinity(L: Float32Array, width: number, height: number): Affinity {
  const n = width * height;
  const spread = new Float32Array(n);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const centre = L[i]! / 100;
      let sum = 0,
        sum2 = 0,
        count = 0,
        nearest = Infinity;
      for (let dy = -1; dy <= 1; dy++) {
        const yy = y + dy;
        if (yy < 0 || yy >= height) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const xx = x + dx;
          if (xx < 0 || xx >= width) continue;
          const v = L[yy * width + xx]! / 100;
          sum += v;
          sum2 += v * v;
          count++;
          if (dx !== 0 || dy !== 0) nearest = Math.min(nearest, (v - centre) * (v - centre));
        }
      }
      const mean = sum / count;
      const variance = Math.max(0, sum2 / count - mean * mean);
      let s = VARIANCE_SCALE * variance;
      const floor = -nearest / Math.log(MIN_NEIGHBOUR_WEIGHT);
      if (s < floor) s = floor;
      spread[i] = Math.max(s, MIN_SPREAD);
    }
  }
  const east = new Float32Array(n),
    south = new Float32Array(n);
  const southEast = new Float32Array(n),
    southWest = new Float32Array(n);
  const weight = (i: number, j: number): number => {
    const d = (L[i]! - L[j]!) / 100;
    return Math.exp((-2 * d * d) / (spread[i]! + spread[j]!));
  };
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      if (x + 1 < width) east[i] = weight(i, i + 1);
      if (y + 1 < height) {
        south[i] = weight(i, i + width);
        if (x + 1 < width) southEast[i] = weight(i, i + width + 1);
        if (x > 0) southWest[i] = weight(i, i + width - 1);
      }
    }
  }
  return { width, height, east, south, southEast, southWest };
}

/**
 * Cuts the graph where a colour prediction changes (our addition to Levin et al., whose weights see luminance
 * only): each weight is multiplied by exp(-|delta a*b*|^2 / 2 scale^2) over the predicted a*b* of its two pixels, so
 * a hint stops where the model sees another object even when luminance runs on (a green field meeting orange
 * trees of the same lightness). A flat prediction (a grey, untrained model) leaves the graph as it was.
 *
 * @example
 *   const graph = withPredictionEdges(levinAffinity(L, w, h), predictedA, predictedB, PREDICTION_EDGE_SCALE);
 */
export function withPredictionEdges(graph: Affinity, a: Float32Array, b: Float32Array, scale: number): Affinity {
  if (!(scale > 0)) return graph;
  const { width, height } = graph;
  const k = 1 / (2 * scale * scale);
  const factor = (i: number, j: number): number => {
    const da = a[i]! - a[j]!,
      db = b[i]! - b[j]!;
    return Math.exp(-(da * da + db * db) * k);
  };
  const east = graph.east.slice(),
    south = graph.south.slice(),
    southEast = graph.southEast.slice(),
    southWest = graph.southWest.slice();
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      if (x + 1 < width) east[i]! *= factor(i, i + 1);
      if (y + 1 < height) {
        south[i]! *= factor(i, i + width);
        if (x + 1 < width) southEast[i]! *= factor(i, i + width + 1);
        if (x > 0) southWest[i]! *= factor(i, i + width - 1);
      }
    }
  }
  return { width, height, east, south, southEast, southWest };
}

/**
 * The graph of 2 x 2 blocks: the weight between two blocks is the sum of the fine weights that cross
 * between them (the Galerkin product with piecewise-constant interpolation), halved because that product
 * doubles a 2-D diffusion's strength relative to area terms. Edges stay barriers: a block pair is only
 * well joined if fine pixels across them are.
 */
export function coarsenAffinity(fine: Affinity): Affinity {
  const { width, height } = fine;
  const cw = (width + 1) >> 1;
  const ch = (height + 1) >> 1;
  const n = cw * ch;
  const east = new Float32Array(n),
    south = new Float32Array(n);
  const southEast = new Float32Array(n),
    southWest = new Float32Array(n);
  const add = (x0: number, y0: number, x1: number, y1: number, w: number): void => {
    let X0 = x0 >> 1,
      Y0 = y0 >> 1,
      X1 = x1 >> 1,
      Y1 = y1 >> 1;
    if (X0 === X1 && Y0 === Y1) return;
    // Orient the edge forward (downwards, or rightwards within a row).
    if (Y1 < Y0 || (Y1 === Y0 && X1 < X0)) [X0, Y0, X1, Y1] = [X1, Y1, X0, Y0];
    const i = Y0 * cw + X0;
    const half = 0.5 * w;
    if (Y1 === Y0) east[i] += half;
    else if (X1 === X0) south[i] += half;
    else if (X1 > X0) southEast[i] += half;
    else southWest[i] += half;
  };
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      if (x + 1 < width) add(x, y, x + 1, y, fine.east[i]!);
      if (y + 1 < height) {
        add(x, y, x, y + 1, fine.south[i]!);
        if (x + 1 < width) add(x, y, x + 1, y + 1, fine.southEast[i]!);
        if (x > 0) add(x, y, x - 1, y + 1, fine.southWest[i]!);
      }
    }
  }
  return { width: cw, height: ch, east, south, southEast, southWest };
}

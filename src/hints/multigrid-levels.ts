/**
 * The levels of the multigrid solver (`multigrid.ts`): the finest on the pixel grid itself, coarser ones as
 * compressed sparse rows. Each offers A x products and Gauss-Seidel sweeps for a* and b* at once.
 */

/** One grid's system: A = D - W, with W the edge weights and D = extra + row sums of W. */
export interface GridSystem {
  width: number;
  height: number;
  /** Edge weights, stored on the first pixel of each edge: (x+1, y), (x, y+1), (x+1, y+1), (x-1, y+1). */
  east: Float64Array;
  south: Float64Array;
  southEast: Float64Array;
  southWest: Float64Array;
  /** Diagonal term beyond the edges (data weights, pulls of fixed neighbours). */
  extra: Float64Array;
  /** 1 where the pixel is a variable; inactive pixels have no edges and stay 0. */
  active: Uint8Array;
}

/** What every level offers: products, smoothing, and its neighbour lists for building the next level. */
export interface Level {
  n: number;
  diag: Float64Array;
  active: Uint8Array;
  /** q = A p for two vectors at once (a* and b*); returns p . q for each. */
  multiply(pA: Float64Array, pB: Float64Array, qA: Float64Array, qB: Float64Array): [number, number];
  /** One Gauss-Seidel sweep on A x = b for two systems at once. */
  sweep(xA: Float64Array, xB: Float64Array, bA: Float64Array, bB: Float64Array, forward: boolean): void;
  /** Writes pixel i's neighbours and weights into the scratch arrays; returns how many. */
  neighbours(i: number, index: Int32Array, weight: Float64Array): number;
}

/** The finest level, on the pixel grid itself (no index arrays). */
export class GridLevel implements Level {
  readonly n: number;
  readonly diag: Float64Array;
  readonly active: Uint8Array;

  constructor(private readonly s: GridSystem) {
    const { width: w, height: h } = s;
    this.n = w * h;
    this.active = s.active;
    const diag = Float64Array.from(s.extra);
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        const i = y * w + x;
        let v = s.east[i]!;
        if (v) {
          diag[i] += v;
          diag[i + 1] += v;
        }
        v = s.south[i]!;
        if (v) {
          diag[i] += v;
          diag[i + w] += v;
        }
        v = s.southEast[i]!;
        if (v) {
          diag[i] += v;
          diag[i + w + 1] += v;
        }
        v = s.southWest[i]!;
        if (v) {
          diag[i] += v;
          diag[i + w - 1] += v;
        }
      }
    }
    for (let i = 0; i < this.n; i++) if (!s.active[i]) diag[i] = 1;
    this.diag = diag;
  }

  /** Sum of w_ij v_j over the neighbours of a border pixel i at (x, y). */
  private sum(v: Float64Array, i: number, x: number, y: number): number {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    let s = 0;
    if (x < w - 1) s += E[i]! * v[i + 1]!;
    if (x > 0) s += E[i - 1]! * v[i - 1]!;
    if (y < h - 1) {
      s += S[i]! * v[i + w]!;
      if (x < w - 1) s += SE[i]! * v[i + w + 1]!;
      if (x > 0) s += SW[i]! * v[i + w - 1]!;
    }
    if (y > 0) {
      s += S[i - w]! * v[i - w]!;
      if (x > 0) s += SE[i - w - 1]! * v[i - w - 1]!;
      if (x < w - 1) s += SW[i - w + 1]! * v[i - w + 1]!;
    }
    return s;
  }

  // The interior loops are written out in full: a call per pixel costs as much as the arithmetic.
  multiply(pA: Float64Array, pB: Float64Array, qA: Float64Array, qB: Float64Array): [number, number] {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const { diag, active } = this;
    let dotA = 0,
      dotB = 0;
    for (let y = 0; y < h; y++) {
      const edgeRow = y === 0 || y === h - 1;
      for (let x = 0, i = y * w; x < w; x++, i++) {
        if (!active[i]) {
          qA[i] = 0;
          qB[i] = 0;
          continue;
        }
        let sA: number, sB: number;
        if (edgeRow || x === 0 || x === w - 1) {
          sA = this.sum(pA, i, x, y);
          sB = this.sum(pB, i, x, y);
        } else {
          const e0 = E[i]!,
            e1 = E[i - 1]!,
            s0 = S[i]!,
            s1 = S[i - w]!,
            d0 = SE[i]!,
            d1 = SE[i - w - 1]!,
            f0 = SW[i]!,
            f1 = SW[i - w + 1]!;
          sA =
            e0 * pA[i + 1]! +
            e1 * pA[i - 1]! +
            s0 * pA[i + w]! +
            s1 * pA[i - w]! +
            d0 * pA[i + w + 1]! +
            d1 * pA[i - w - 1]! +
            f0 * pA[i + w - 1]! +
            f1 * pA[i - w + 1]!;
          sB =
            e0 * pB[i + 1]! +
            e1 * pB[i - 1]! +
            s0 * pB[i + w]! +
            s1 * pB[i - w]! +
            d0 * pB[i + w + 1]! +
            d1 * pB[i - w - 1]! +
            f0 * pB[i + w - 1]! +
            f1 * pB[i - w + 1]!;
        }
        const d = diag[i]!;
        const vA = d * pA[i]! - sA,
          vB = d * pB[i]! - sB;
        qA[i] = vA;
        qB[i] = vB;
        dotA += pA[i]! * vA;
        dotB += pB[i]! * vB;
      }
    }
    return [dotA, dotB];
  }

  sweep(xA: Float64Array, xB: Float64Array, bA: Float64Array, bB: Float64Array, forward: boolean): void {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const { diag, active } = this;
    const step = forward ? 1 : -1;
    for (let k = 0; k < h; k++) {
      const y = forward ? k : h - 1 - k;
      const edgeRow = y === 0 || y === h - 1;
      for (let m = 0, px = forward ? 0 : w - 1; m < w; m++, px += step) {
        const i = y * w + px;
        if (!active[i]) continue;
        let sA: number, sB: number;
        if (edgeRow || px === 0 || px === w - 1) {
          sA = this.sum(xA, i, px, y);
          sB = this.sum(xB, i, px, y);
        } else {
          const e0 = E[i]!,
            e1 = E[i - 1]!,
            s0 = S[i]!,
            s1 = S[i - w]!,
            d0 = SE[i]!,
            d1 = SE[i - w - 1]!,
            f0 = SW[i]!,
            f1 = SW[i - w + 1]!;
          sA =
            e0 * xA[i + 1]! +
            e1 * xA[i - 1]! +
            s0 * xA[i + w]! +
            s1 * xA[i - w]! +
            d0 * xA[i + w + 1]! +
            d1 * xA[i - w - 1]! +
            f0 * xA[i + w - 1]! +
            f1 * xA[i - w + 1]!;
          sB =
            e0 * xB[i + 1]! +
            e1 * xB[i - 1]! +
            s0 * xB[i + w]! +
            s1 * xB[i - w]! +
            d0 * xB[i + w + 1]! +
            d1 * xB[i - w - 1]! +
            f0 * xB[i + w - 1]! +
            f1 * xB[i - w + 1]!;
        }
        const inv = 1 / diag[i]!;
        xA[i] = (bA[i]! + sA) * inv;
        xB[i] = (bB[i]! + sB) * inv;
      }
    }
  }

  neighbours(i: number, index: Int32Array, weight: Float64Array): number {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const x = i % w,
      y = (i - x) / w;
    let k = 0,
      v = 0;
    if (x < w - 1 && (v = E[i]!) > 0) {
      index[k] = i + 1;
      weight[k++] = v;
    }
    if (x > 0 && (v = E[i - 1]!) > 0) {
      index[k] = i - 1;
      weight[k++] = v;
    }
    if (y < h - 1) {
      if ((v = S[i]!) > 0) {
        index[k] = i + w;
        weight[k++] = v;
      }
      if (x < w - 1 && (v = SE[i]!) > 0) {
        index[k] = i + w + 1;
        weight[k++] = v;
      }
      if (x > 0 && (v = SW[i]!) > 0) {
        index[k] = i + w - 1;
        weight[k++] = v;
      }
    }
    if (y > 0) {
      if ((v = S[i - w]!) > 0) {
        index[k] = i - w;
        weight[k++] = v;
      }
      if (x > 0 && (v = SE[i - w - 1]!) > 0) {
        index[k] = i - w - 1;
        weight[k++] = v;
      }
      if (x < w - 1 && (v = SW[i - w + 1]!) > 0) {
        index[k] = i - w + 1;
        weight[k++] = v;
      }
    }
    return k;
  }
}

/** A coarse level: compressed sparse rows of off-diagonal weights. */
export class SparseLevel implements Level {
  constructor(
    readonly n: number,
    private readonly start: Int32Array,
    private readonly column: Int32Array,
    private readonly weight: Float64Array,
    readonly diag: Float64Array,
    readonly active: Uint8Array,
  ) {}

  multiply(pA: Float64Array, pB: Float64Array, qA: Float64Array, qB: Float64Array): [number, number] {
    const { start, column, weight, diag, active } = this;
    let dotA = 0,
      dotB = 0;
    for (let i = 0; i < this.n; i++) {
      if (!active[i]) {
        qA[i] = 0;
        qB[i] = 0;
        continue;
      }
      let sA = 0,
        sB = 0;
      for (let k = start[i]!; k < start[i + 1]!; k++) {
        const j = column[k]!,
          v = weight[k]!;
        sA += v * pA[j]!;
        sB += v * pB[j]!;
      }
      const d = diag[i]!;
      const vA = d * pA[i]! - sA,
        vB = d * pB[i]! - sB;
      qA[i] = vA;
      qB[i] = vB;
      dotA += pA[i]! * vA;
      dotB += pB[i]! * vB;
    }
    return [dotA, dotB];
  }

  sweep(xA: Float64Array, xB: Float64Array, bA: Float64Array, bB: Float64Array, forward: boolean): void {
    const { start, column, weight, diag, active, n } = this;
    for (let m = 0; m < n; m++) {
      const i = forward ? m : n - 1 - m;
      if (!active[i]) continue;
      let sA = bA[i]!,
        sB = bB[i]!;
      for (let k = start[i]!; k < start[i + 1]!; k++) {
        const j = column[k]!,
          v = weight[k]!;
        sA += v * xA[j]!;
        sB += v * xB[j]!;
      }
      const inv = 1 / diag[i]!;
      xA[i] = sA * inv;
      xB[i] = sB * inv;
    }
  }

  neighbours(i: number, index: Int32Array, weight: Float64Array): number {
    let k = 0;
    for (let e = this.start[i]!; e < this.start[i + 1]!; e++) {
      index[k] = this.column[e]!;
      weight[k++] = this.weight[e]!;
    }
    return k;
  }
}

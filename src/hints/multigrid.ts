/**
 * A solver for the symmetric positive-definite systems of hint propagation: an 8-neighbour weighted graph
 * Laplacian plus a diagonal term, on a pixel grid, some pixels inactive (held fixed). Conjugate gradients
 * preconditioned by one multigrid V-cycle (aggregation of 2 x 2 blocks, Galerkin coarse operators,
 * symmetric Gauss-Seidel smoothing, an exact Cholesky solve on the coarsest grid), both a* and b* at once.
 * Aggregation keeps luminance edges as barriers on every level, so convergence does not depend on them.
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

interface Level extends GridSystem {
  diag: Float64Array;
}

export interface SolveReport {
  iterations: number;
  /** Final residual norm over the right-hand side's norm. */
  residual: number;
}

// Common practice for aggregation multigrid: stop coarsening once a dense factorisation is cheap.
const COARSEST_NODES = 400;

function withDiagonal(s: GridSystem): Level {
  const { width: w, height: h } = s;
  const diag = Float64Array.from(s.extra);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      let v = s.east[i]!; diag[i] += v; if (v) diag[i + 1] += v;
      v = s.south[i]!; diag[i] += v; if (v) diag[i + w] += v;
      v = s.southEast[i]!; diag[i] += v; if (v) diag[i + w + 1] += v;
      v = s.southWest[i]!; diag[i] += v; if (v) diag[i + w - 1] += v;
    }
  }
  for (let i = 0; i < w * h; i++) if (!s.active[i]) diag[i] = 1;
  return { ...s, diag };
}

/** The Galerkin operator P^T A P for piecewise-constant interpolation from 2 x 2 blocks of active pixels. */
function coarsen(f: Level): Level {
  const { width: w, height: h } = f;
  const cw = (w + 1) >> 1, ch = (h + 1) >> 1, m = cw * ch;
  const east = new Float64Array(m), south = new Float64Array(m), southEast = new Float64Array(m), southWest = new Float64Array(m);
  const extra = new Float64Array(m), active = new Uint8Array(m);
  const add = (x0: number, y0: number, x1: number, y1: number, v: number): void => {
    if (!v) return;
    let X0 = x0 >> 1, Y0 = y0 >> 1, X1 = x1 >> 1, Y1 = y1 >> 1;
    if (X0 === X1 && Y0 === Y1) return;
    if (Y1 < Y0 || (Y1 === Y0 && X1 < X0)) [X0, Y0, X1, Y1] = [X1, Y1, X0, Y0];
    const i = Y0 * cw + X0;
    if (Y1 === Y0) east[i] += v;
    else if (X1 === X0) south[i] += v;
    else if (X1 > X0) southEast[i] += v;
    else southWest[i] += v;
  };
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      if (!f.active[i]) continue;
      const j = (y >> 1) * cw + (x >> 1);
      active[j] = 1;
      extra[j] += f.extra[i]!;
      add(x, y, x + 1, y, f.east[i]!);
      add(x, y, x, y + 1, f.south[i]!);
      add(x, y, x + 1, y + 1, f.southEast[i]!);
      add(x, y, x - 1, y + 1, f.southWest[i]!);
    }
  }
  return withDiagonal({ width: cw, height: ch, east, south, southEast, southWest, extra, active });
}

/** Sum of w_ij v_j over the neighbours j of a border pixel i at (x, y). */
function neighbourSum(l: Level, v: Float64Array, i: number, x: number, y: number): number {
  const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = l;
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

/** q = A p; returns p . q. Inactive pixels give 0. Interior pixels take the unchecked path. */
function multiply(l: Level, p: Float64Array, q: Float64Array): number {
  const { width: w, height: h, diag, active, east: E, south: S, southEast: SE, southWest: SW } = l;
  let dot = 0;
  for (let y = 0; y < h; y++) {
    const interior = y > 0 && y < h - 1;
    for (let x = 0, i = y * w; x < w; x++, i++) {
      if (!active[i]) { q[i] = 0; continue; }
      const s = interior && x > 0 && x < w - 1
        ? E[i]! * p[i + 1]! + E[i - 1]! * p[i - 1]! + S[i]! * p[i + w]! + S[i - w]! * p[i - w]!
          + SE[i]! * p[i + w + 1]! + SE[i - w - 1]! * p[i - w - 1]! + SW[i]! * p[i + w - 1]! + SW[i - w + 1]! * p[i - w + 1]!
        : neighbourSum(l, p, i, x, y);
      const v = diag[i]! * p[i]! - s;
      q[i] = v;
      dot += p[i]! * v;
    }
  }
  return dot;
}

/** One Gauss-Seidel sweep on A x = b, forwards or backwards through the pixels. */
function sweep(l: Level, x: Float64Array, b: Float64Array, forward: boolean): void {
  const { width: w, height: h, diag, active, east: E, south: S, southEast: SE, southWest: SW } = l;
  for (let k = 0; k < h; k++) {
    const y = forward ? k : h - 1 - k;
    const interior = y > 0 && y < h - 1;
    for (let m = 0; m < w; m++) {
      const px = forward ? m : w - 1 - m;
      const i = y * w + px;
      if (!active[i]) continue;
      const s = interior && px > 0 && px < w - 1
        ? E[i]! * x[i + 1]! + E[i - 1]! * x[i - 1]! + S[i]! * x[i + w]! + S[i - w]! * x[i - w]!
          + SE[i]! * x[i + w + 1]! + SE[i - w - 1]! * x[i - w - 1]! + SW[i]! * x[i + w - 1]! + SW[i - w + 1]! * x[i - w + 1]!
        : neighbourSum(l, x, i, px, y);
      x[i] = (b[i]! + s) / diag[i]!;
    }
  }
}

/** Dense Cholesky factor of the coarsest level's matrix (lower triangle, row-major). */
function factorCoarsest(l: Level): Float64Array {
  const n = l.width * l.height;
  const a = new Float64Array(n * n);
  const scratch = new Float64Array(n), column = new Float64Array(n);
  for (let j = 0; j < n; j++) {
    scratch.fill(0);
    scratch[j] = 1;
    multiply(l, scratch, column);
    if (!l.active[j]) column[j] = 1;
    for (let i = 0; i < n; i++) a[i * n + j] = column[i]!;
  }
  for (let j = 0; j < n; j++) {
    let d = a[j * n + j]!;
    for (let k = 0; k < j; k++) d -= a[j * n + k]! * a[j * n + k]!;
    const root = Math.sqrt(Math.max(d, 1e-300));
    a[j * n + j] = root;
    for (let i = j + 1; i < n; i++) {
      let s = a[i * n + j]!;
      for (let k = 0; k < j; k++) s -= a[i * n + k]! * a[j * n + k]!;
      a[i * n + j] = s / root;
    }
  }
  return a;
}

function choleskySolve(factor: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i]!;
    for (let k = 0; k < i; k++) s -= factor[i * n + k]! * x[k]!;
    x[i] = s / factor[i * n + i]!;
  }
  for (let i = n - 1; i >= 0; i--) {
    let s = x[i]!;
    for (let k = i + 1; k < n; k++) s -= factor[k * n + i]! * x[k]!;
    x[i] = s / factor[i * n + i]!;
  }
}

/** The level hierarchy with scratch vectors, built once per system. */
export class MultigridSolver {
  private readonly levels: Level[];
  private readonly factor: Float64Array;
  private readonly scratch: Array<{ x: Float64Array; b: Float64Array; r: Float64Array }>;

  constructor(system: GridSystem) {
    this.levels = [withDiagonal(system)];
    while (this.levels[this.levels.length - 1]!.width * this.levels[this.levels.length - 1]!.height > COARSEST_NODES) {
      this.levels.push(coarsen(this.levels[this.levels.length - 1]!));
    }
    this.factor = factorCoarsest(this.levels[this.levels.length - 1]!);
    this.scratch = this.levels.map((l) => {
      const n = l.width * l.height;
      return { x: new Float64Array(n), b: new Float64Array(n), r: new Float64Array(n) };
    });
  }

  /** Levels in the hierarchy, finest first. */
  get depth(): number {
    return this.levels.length;
  }

  /** z = B r, one symmetric V-cycle from a zero start (a fixed symmetric operator, as PCG needs). */
  private precondition(k: number, b: Float64Array, x: Float64Array): void {
    const l = this.levels[k]!;
    const n = l.width * l.height;
    if (k === this.levels.length - 1) {
      choleskySolve(this.factor, n, b, x);
      for (let i = 0; i < n; i++) if (!l.active[i]) x[i] = 0;
      return;
    }
    x.fill(0);
    sweep(l, x, b, true);
    const { r } = this.scratch[k]!;
    multiply(l, x, r);
    for (let i = 0; i < n; i++) r[i] = l.active[i] ? b[i]! - r[i]! : 0;
    const c = this.levels[k + 1]!;
    const { x: xc, b: bc } = this.scratch[k + 1]!;
    bc.fill(0);
    const cw = c.width;
    for (let y = 0, i = 0; y < l.height; y++) {
      for (let px = 0; px < l.width; px++, i++) bc[(y >> 1) * cw + (px >> 1)] += r[i]!;
    }
    this.precondition(k + 1, bc, xc);
    for (let y = 0, i = 0; y < l.height; y++) {
      for (let px = 0; px < l.width; px++, i++) if (l.active[i]) x[i] += xc[(y >> 1) * cw + (px >> 1)]!;
    }
    sweep(l, x, b, false);
  }

  /**
   * Solves A x = b for both channels, starting from x (updated in place); stops when the residual falls
   * below `tolerance` times the right-hand side's norm.
   */
  solve(bA: Float64Array, bB: Float64Array, xA: Float64Array, xB: Float64Array, tolerance: number, maxIterations: number): SolveReport {
    const l = this.levels[0]!;
    const n = l.width * l.height;
    const channels = [{ b: bA, x: xA }, { b: bB, x: xB }].map(({ b, x }) => {
      const r = new Float64Array(n);
      multiply(l, x, r);
      let bNorm = 0, rNorm = 0;
      for (let i = 0; i < n; i++) {
        r[i] = l.active[i] ? b[i]! - r[i]! : 0;
        bNorm += l.active[i] ? b[i]! * b[i]! : 0;
        rNorm += r[i]! * r[i]!;
      }
      return { b, x, r, z: new Float64Array(n), p: new Float64Array(n), q: new Float64Array(n), rz: 0, bNorm: Math.sqrt(bNorm), rNorm: Math.sqrt(rNorm), done: false };
    });
    let iterations = 0;
    for (const c of channels) {
      c.done = c.rNorm <= tolerance * c.bNorm;
      if (c.done) continue;
      this.precondition(0, c.r, c.z);
      c.p.set(c.z);
      for (let i = 0; i < n; i++) c.rz += c.r[i]! * c.z[i]!;
    }
    while (iterations < maxIterations && channels.some((c) => !c.done)) {
      iterations++;
      for (const c of channels) {
        if (c.done) continue;
        const pq = multiply(l, c.p, c.q);
        const alpha = c.rz / pq;
        let rr = 0;
        for (let i = 0; i < n; i++) {
          c.x[i] += alpha * c.p[i]!;
          c.r[i] -= alpha * c.q[i]!;
          rr += c.r[i]! * c.r[i]!;
        }
        c.rNorm = Math.sqrt(rr);
        if (c.rNorm <= tolerance * c.bNorm || !(pq > 0)) { c.done = true; continue; }
        this.precondition(0, c.r, c.z);
        let rz = 0;
        for (let i = 0; i < n; i++) rz += c.r[i]! * c.z[i]!;
        const beta = rz / c.rz;
        c.rz = rz;
        for (let i = 0; i < n; i++) c.p[i] = c.z[i]! + beta * c.p[i]!;
      }
    }
    const residual = Math.max(...channels.map((c) => (c.bNorm > 0 ? c.rNorm / c.bNorm : 0)));
    return { iterations, residual };
  }
}

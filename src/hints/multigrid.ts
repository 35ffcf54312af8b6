/**
 * A solver for the symmetric positive-definite systems of hint propagation: an 8-neighbour weighted graph
 * Laplacian plus a diagonal term, on a pixel grid, some pixels inactive (held fixed). Conjugate gradients
 * preconditioned by one algebraic multigrid V-cycle: pixels are grouped with their most strongly joined
 * neighbours (aggregation, so groups never straddle a luminance edge), coarse systems are Galerkin products
 * with piecewise-constant interpolation, smoothing is symmetric Gauss-Seidel, and the coarsest system is
 * solved exactly by Cholesky. Both a* and b* are solved together.
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

export interface SolveReport {
  iterations: number;
  /** Final residual norm over the right-hand side's norm (the larger of the two channels). */
  residual: number;
}

// Common practice for aggregation multigrid (from memory): a neighbour is strongly joined when its weight is
// at least a quarter of the strongest; groups of up to 4; a dense solve once a few hundred unknowns remain.
const STRENGTH = 0.25;
const GROUP = 4;
const COARSEST_NODES = 400;

/** What every level offers: products, smoothing, and its neighbour lists for building the next level. */
interface Level {
  n: number;
  diag: Float64Array;
  active: Uint8Array;
  /** q = A p; returns p . q. */
  multiply(p: Float64Array, q: Float64Array): number;
  /** One Gauss-Seidel sweep on A x = b. */
  sweep(x: Float64Array, b: Float64Array, forward: boolean): void;
  /** Writes pixel i's neighbours and weights into the scratch arrays; returns how many. */
  neighbours(i: number, index: Int32Array, weight: Float64Array): number;
}

/** The finest level, on the pixel grid itself (no index arrays). */
class GridLevel implements Level {
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
        let v = s.east[i]!; if (v) { diag[i] += v; diag[i + 1] += v; }
        v = s.south[i]!; if (v) { diag[i] += v; diag[i + w] += v; }
        v = s.southEast[i]!; if (v) { diag[i] += v; diag[i + w + 1] += v; }
        v = s.southWest[i]!; if (v) { diag[i] += v; diag[i + w - 1] += v; }
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
  multiply(p: Float64Array, q: Float64Array): number {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const { diag, active } = this;
    let dot = 0;
    for (let y = 0; y < h; y++) {
      const edgeRow = y === 0 || y === h - 1;
      for (let x = 0, i = y * w; x < w; x++, i++) {
        if (!active[i]) { q[i] = 0; continue; }
        const s = edgeRow || x === 0 || x === w - 1
          ? this.sum(p, i, x, y)
          : E[i]! * p[i + 1]! + E[i - 1]! * p[i - 1]! + S[i]! * p[i + w]! + S[i - w]! * p[i - w]!
            + SE[i]! * p[i + w + 1]! + SE[i - w - 1]! * p[i - w - 1]! + SW[i]! * p[i + w - 1]! + SW[i - w + 1]! * p[i - w + 1]!;
        const v = diag[i]! * p[i]! - s;
        q[i] = v;
        dot += p[i]! * v;
      }
    }
    return dot;
  }

  sweep(x: Float64Array, b: Float64Array, forward: boolean): void {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const { diag, active } = this;
    const step = forward ? 1 : -1;
    for (let k = 0; k < h; k++) {
      const y = forward ? k : h - 1 - k;
      const edgeRow = y === 0 || y === h - 1;
      for (let m = 0, px = forward ? 0 : w - 1; m < w; m++, px += step) {
        const i = y * w + px;
        if (!active[i]) continue;
        const s = edgeRow || px === 0 || px === w - 1
          ? this.sum(x, i, px, y)
          : E[i]! * x[i + 1]! + E[i - 1]! * x[i - 1]! + S[i]! * x[i + w]! + S[i - w]! * x[i - w]!
            + SE[i]! * x[i + w + 1]! + SE[i - w - 1]! * x[i - w - 1]! + SW[i]! * x[i + w - 1]! + SW[i - w + 1]! * x[i - w + 1]!;
        x[i] = (b[i]! + s) / diag[i]!;
      }
    }
  }

  neighbours(i: number, index: Int32Array, weight: Float64Array): number {
    const { width: w, height: h, east: E, south: S, southEast: SE, southWest: SW } = this.s;
    const x = i % w, y = (i - x) / w;
    let k = 0;
    const put = (j: number, v: number): void => { if (v > 0) { index[k] = j; weight[k++] = v; } };
    if (x < w - 1) put(i + 1, E[i]!);
    if (x > 0) put(i - 1, E[i - 1]!);
    if (y < h - 1) {
      put(i + w, S[i]!);
      if (x < w - 1) put(i + w + 1, SE[i]!);
      if (x > 0) put(i + w - 1, SW[i]!);
    }
    if (y > 0) {
      put(i - w, S[i - w]!);
      if (x > 0) put(i - w - 1, SE[i - w - 1]!);
      if (x < w - 1) put(i - w + 1, SW[i - w + 1]!);
    }
    return k;
  }
}

/** A coarse level: compressed sparse rows of off-diagonal weights. */
class SparseLevel implements Level {
  constructor(
    readonly n: number,
    private readonly start: Int32Array,
    private readonly column: Int32Array,
    private readonly weight: Float64Array,
    readonly diag: Float64Array,
    readonly active: Uint8Array,
  ) {}

  multiply(p: Float64Array, q: Float64Array): number {
    const { start, column, weight, diag, active } = this;
    let dot = 0;
    for (let i = 0; i < this.n; i++) {
      if (!active[i]) { q[i] = 0; continue; }
      let s = 0;
      for (let k = start[i]!; k < start[i + 1]!; k++) s += weight[k]! * p[column[k]!]!;
      const v = diag[i]! * p[i]! - s;
      q[i] = v;
      dot += p[i]! * v;
    }
    return dot;
  }

  sweep(x: Float64Array, b: Float64Array, forward: boolean): void {
    const { start, column, weight, diag, active, n } = this;
    for (let m = 0; m < n; m++) {
      const i = forward ? m : n - 1 - m;
      if (!active[i]) continue;
      let s = b[i]!;
      for (let k = start[i]!; k < start[i + 1]!; k++) s += weight[k]! * x[column[k]!]!;
      x[i] = s / diag[i]!;
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

/** Groups of strongly joined nodes: `group[i]` for each active node, -1 for inactive ones. */
function aggregate(level: Level): { group: Int32Array; count: number } {
  const { n, active } = level;
  const group = new Int32Array(n).fill(-1);
  const index = new Int32Array(4096), weight = new Float64Array(4096);
  let count = 0;
  const alone: number[] = [];
  for (let i = 0; i < n; i++) {
    if (!active[i] || group[i] !== -1) continue;
    const k = level.neighbours(i, index, weight);
    let strongest = 0;
    for (let e = 0; e < k; e++) strongest = Math.max(strongest, weight[e]!);
    // Add the strongest free strong neighbours, up to the group size.
    let size = 1;
    for (; size < GROUP; size++) {
      let best = -1, bestWeight = STRENGTH * strongest;
      for (let e = 0; e < k; e++) {
        const j = index[e]!;
        if (active[j] && group[j] === -1 && j !== i && weight[e]! >= bestWeight && weight[e]! > 0) { best = j; bestWeight = weight[e]!; }
      }
      if (best < 0) break;
      group[best] = count;
    }
    if (size === 1) { alone.push(i); group[i] = -2; continue; }
    group[i] = count++;
  }
  // A node whose neighbours were all taken joins the group it is most strongly joined to.
  for (const i of alone) {
    const k = level.neighbours(i, index, weight);
    let best = -1, bestWeight = 0;
    for (let e = 0; e < k; e++) {
      const g = group[index[e]!]!;
      if (g >= 0 && weight[e]! > bestWeight) { best = g; bestWeight = weight[e]!; }
    }
    group[i] = best >= 0 ? best : count++;
  }
  return { group, count };
}

/** The Galerkin product P^T A P for the groups (P piecewise constant). */
function coarsen(level: Level, group: Int32Array, count: number): SparseLevel {
  const { n } = level;
  // Members of each group, by counting sort.
  const first = new Int32Array(count + 1);
  for (let i = 0; i < n; i++) if (group[i]! >= 0) first[group[i]! + 1]++;
  for (let g = 0; g < count; g++) first[g + 1] += first[g]!;
  const fill = first.slice(0, count), members = new Int32Array(first[count]!);
  for (let i = 0; i < n; i++) if (group[i]! >= 0) members[fill[group[i]!]++] = i;

  const index = new Int32Array(4096), weight = new Float64Array(4096);
  const mark = new Int32Array(count).fill(-1), slot = new Int32Array(count);
  const start = new Int32Array(count + 1);
  let column: number[] = [], values: number[] = [];
  const diag = new Float64Array(count);
  for (let g = 0; g < count; g++) {
    start[g] = column.length;
    let d = 0;
    for (let m = first[g]!; m < first[g + 1]!; m++) {
      const i = members[m]!;
      d += level.diag[i]!;
      const k = level.neighbours(i, index, weight);
      for (let e = 0; e < k; e++) {
        const h = group[index[e]!]!;
        if (h < 0) continue;
        if (h === g) { d -= weight[e]!; continue; }
        if (mark[h] !== g) { mark[h] = g; slot[h] = column.length; column.push(h); values.push(0); }
        values[slot[h]!]! += weight[e]!;
      }
    }
    diag[g] = d;
  }
  start[count] = column.length;
  const level2 = new SparseLevel(count, start, Int32Array.from(column), Float64Array.from(values), diag, new Uint8Array(count).fill(1));
  column = []; values = [];
  return level2;
}

/** Dense Cholesky factor of a small level's matrix (lower triangle, row-major). */
function factor(level: Level): Float64Array {
  const n = level.n;
  const a = new Float64Array(n * n);
  const unit = new Float64Array(n), column = new Float64Array(n);
  for (let j = 0; j < n; j++) {
    unit.fill(0);
    unit[j] = 1;
    level.multiply(unit, column);
    if (!level.active[j]) column[j] = 1;
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

function choleskySolve(f: Float64Array, n: number, b: Float64Array, x: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i]!;
    for (let k = 0; k < i; k++) s -= f[i * n + k]! * x[k]!;
    x[i] = s / f[i * n + i]!;
  }
  for (let i = n - 1; i >= 0; i--) {
    let s = x[i]!;
    for (let k = i + 1; k < n; k++) s -= f[k * n + i]! * x[k]!;
    x[i] = s / f[i * n + i]!;
  }
}

/**
 * The level hierarchy of one system, built once, then used for both channels.
 *
 * @example
 *   const solver = new MultigridSolver(system);
 *   solver.solve(bA, bB, xA, xB, 1e-4, 100);
 */
export class MultigridSolver {
  private readonly levels: Level[];
  private readonly groups: Int32Array[] = [];
  private readonly coarsest: Float64Array;
  private readonly scratch: Array<{ x: Float64Array; b: Float64Array; r: Float64Array }>;

  constructor(system: GridSystem) {
    this.levels = [new GridLevel(system)];
    for (;;) {
      const top = this.levels[this.levels.length - 1]!;
      if (top.n <= COARSEST_NODES) break;
      const { group, count } = aggregate(top);
      if (count > 0.9 * top.n) break; // nothing left to merge
      this.groups.push(group);
      this.levels.push(coarsen(top, group, count));
    }
    this.coarsest = factor(this.levels[this.levels.length - 1]!);
    this.scratch = this.levels.map((l) => ({ x: new Float64Array(l.n), b: new Float64Array(l.n), r: new Float64Array(l.n) }));
  }

  /** Levels in the hierarchy, finest first. */
  get depth(): number {
    return this.levels.length;
  }

  /** x = B b: one symmetric V-cycle from a zero start (a fixed symmetric operator, as PCG needs). */
  private cycle(k: number, b: Float64Array, x: Float64Array): void {
    const l = this.levels[k]!;
    if (k === this.levels.length - 1) {
      choleskySolve(this.coarsest, l.n, b, x);
      for (let i = 0; i < l.n; i++) if (!l.active[i]) x[i] = 0;
      return;
    }
    x.fill(0);
    l.sweep(x, b, true);
    const { r } = this.scratch[k]!;
    l.multiply(x, r);
    const group = this.groups[k]!;
    const { x: xc, b: bc } = this.scratch[k + 1]!;
    bc.fill(0);
    for (let i = 0; i < l.n; i++) if (group[i]! >= 0) bc[group[i]!] += b[i]! - r[i]!;
    this.cycle(k + 1, bc, xc);
    for (let i = 0; i < l.n; i++) if (group[i]! >= 0) x[i] += xc[group[i]!]!;
    l.sweep(x, b, false);
  }

  /**
   * Solves A x = b for both channels, starting from x (updated in place), until the residual falls
   * below `tolerance` times the right-hand side's norm.
   */
  solve(bA: Float64Array, bB: Float64Array, xA: Float64Array, xB: Float64Array, tolerance: number, maxIterations: number): SolveReport {
    const l = this.levels[0]!;
    const n = l.n;
    const channels = [{ b: bA, x: xA }, { b: bB, x: xB }].map(({ b, x }) => {
      const r = new Float64Array(n);
      l.multiply(x, r);
      let bNorm = 0, rNorm = 0;
      for (let i = 0; i < n; i++) {
        r[i] = l.active[i] ? b[i]! - r[i]! : 0;
        if (l.active[i]) bNorm += b[i]! * b[i]!;
        rNorm += r[i]! * r[i]!;
      }
      return { x, r, z: new Float64Array(n), p: new Float64Array(n), q: new Float64Array(n), rz: 0, bNorm: Math.sqrt(bNorm), rNorm: Math.sqrt(rNorm), done: false };
    });
    for (const c of channels) {
      c.done = c.rNorm <= tolerance * c.bNorm;
      if (c.done) continue;
      this.cycle(0, c.r, c.z);
      c.p.set(c.z);
      for (let i = 0; i < n; i++) c.rz += c.r[i]! * c.z[i]!;
    }
    let iterations = 0;
    while (iterations < maxIterations && channels.some((c) => !c.done)) {
      iterations++;
      for (const c of channels) {
        if (c.done) continue;
        const pq = l.multiply(c.p, c.q);
        if (!(pq > 0)) { c.done = true; continue; }
        const alpha = c.rz / pq;
        let rr = 0;
        for (let i = 0; i < n; i++) {
          c.x[i] += alpha * c.p[i]!;
          c.r[i] -= alpha * c.q[i]!;
          rr += c.r[i]! * c.r[i]!;
        }
        c.rNorm = Math.sqrt(rr);
        if (c.rNorm <= tolerance * c.bNorm) { c.done = true; continue; }
        this.cycle(0, c.r, c.z);
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

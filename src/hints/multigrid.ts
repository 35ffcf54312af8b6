/**
 * A solver for the symmetric positive-definite systems of hint propagation: an 8-neighbour weighted graph
 * Laplacian plus a diagonal term, on a pixel grid, some pixels inactive (held fixed). Conjugate gradients
 * preconditioned by one algebraic multigrid V-cycle: pixels are grouped with their most strongly joined
 * neighbours (aggregation, so groups never straddle a luminance edge), coarse systems are Galerkin products
 * with piecewise-constant interpolation, smoothing is symmetric Gauss-Seidel, and the coarsest system is
 * solved exactly by Cholesky. Both a* and b* are solved together.
 */
import { GridLevel, SparseLevel, type GridSystem, type Level } from './multigrid-levels.js';

export type { GridSystem } from './multigrid-levels.js';

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

/** Groups of strongly joined nodes: `group[i]` for each active node, -1 for inactive ones. */
function aggregate(level: Level): { group: Int32Array; count: number } {
  const { n, active } = level;
  const group = new Int32Array(n).fill(-1);
  const index = new Int32Array(4096),
    weight = new Float64Array(4096);
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
      let best = -1,
        bestWeight = STRENGTH * strongest;
      for (let e = 0; e < k; e++) {
        const j = index[e]!;
        if (active[j] && group[j] === -1 && j !== i && weight[e]! >= bestWeight && weight[e]! > 0) {
          best = j;
          bestWeight = weight[e]!;
        }
      }
      if (best < 0) break;
      group[best] = count;
    }
    if (size === 1) {
      alone.push(i);
      group[i] = -2;
      continue;
    }
    group[i] = count++;
  }
  // A node whose neighbours were all taken joins the group it is most strongly joined to, if that link is
  // strong (so no group reaches across an edge); otherwise it stays alone.
  for (const i of alone) {
    const k = level.neighbours(i, index, weight);
    let best = -1,
      bestWeight = 0,
      strongest = 0;
    for (let e = 0; e < k; e++) {
      strongest = Math.max(strongest, weight[e]!);
      const g = group[index[e]!]!;
      if (g >= 0 && weight[e]! > bestWeight) {
        best = g;
        bestWeight = weight[e]!;
      }
    }
    group[i] = best >= 0 && bestWeight >= STRENGTH * strongest ? best : count++;
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
  const fill = first.slice(0, count),
    members = new Int32Array(first[count]!);
  for (let i = 0; i < n; i++) if (group[i]! >= 0) members[fill[group[i]!]++] = i;

  const index = new Int32Array(4096),
    weight = new Float64Array(4096);
  const mark = new Int32Array(count).fill(-1),
    slot = new Int32Array(count);
  const start = new Int32Array(count + 1);
  // Each coarse entry comes from at least one fine edge, so the fine edge count bounds the storage.
  let bound = 0;
  for (let i = 0; i < n; i++) if (group[i]! >= 0) bound += level.neighbours(i, index, weight);
  const column = new Int32Array(bound),
    values = new Float64Array(bound);
  let used = 0;
  const diag = new Float64Array(count);
  for (let g = 0; g < count; g++) {
    start[g] = used;
    let d = 0;
    for (let m = first[g]!; m < first[g + 1]!; m++) {
      const i = members[m]!;
      d += level.diag[i]!;
      const k = level.neighbours(i, index, weight);
      for (let e = 0; e < k; e++) {
        const h = group[index[e]!]!;
        if (h < 0) continue;
        if (h === g) {
          d -= weight[e]!;
          continue;
        }
        if (mark[h] !== g) {
          mark[h] = g;
          slot[h] = used;
          column[used] = h;
          values[used++] = 0;
        }
        values[slot[h]!] += weight[e]!;
      }
    }
    diag[g] = d;
  }
  start[count] = used;
  return new SparseLevel(count, start, column.slice(0, used), values.slice(0, used), diag, new Uint8Array(count).fill(1));
}

/** Dense Cholesky factor of a small level's matrix (lower triangle, row-major). */
function factor(level: Level): Float64Array {
  const n = level.n;
  const a = new Float64Array(n * n);
  const unit = new Float64Array(n),
    column = new Float64Array(n),
    spare = new Float64Array(n);
  for (let j = 0; j < n; j++) {
    unit.fill(0);
    unit[j] = 1;
    level.multiply(unit, unit, column, spare);
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
  private readonly scratch: Array<{
    xA: Float64Array;
    xB: Float64Array;
    bA: Float64Array;
    bB: Float64Array;
    rA: Float64Array;
    rB: Float64Array;
  }>;

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
    this.scratch = this.levels.map((l) => ({
      xA: new Float64Array(l.n),
      xB: new Float64Array(l.n),
      bA: new Float64Array(l.n),
      bB: new Float64Array(l.n),
      rA: new Float64Array(l.n),
      rB: new Float64Array(l.n),
    }));
  }

  /** Levels in the hierarchy, finest first. */
  get depth(): number {
    return this.levels.length;
  }

  /** x = B b for both channels: one symmetric V-cycle from a zero start (a fixed symmetric operator, as PCG needs). */
  private cycle(k: number, bA: Float64Array, bB: Float64Array, xA: Float64Array, xB: Float64Array): void {
    const l = this.levels[k]!;
    if (k === this.levels.length - 1) {
      choleskySolve(this.coarsest, l.n, bA, xA);
      choleskySolve(this.coarsest, l.n, bB, xB);
      for (let i = 0; i < l.n; i++)
        if (!l.active[i]) {
          xA[i] = 0;
          xB[i] = 0;
        }
      return;
    }
    xA.fill(0);
    xB.fill(0);
    l.sweep(xA, xB, bA, bB, true);
    const { rA, rB } = this.scratch[k]!;
    l.multiply(xA, xB, rA, rB);
    const group = this.groups[k]!;
    const c = this.scratch[k + 1]!;
    c.bA.fill(0);
    c.bB.fill(0);
    for (let i = 0; i < l.n; i++) {
      const g = group[i]!;
      if (g >= 0) {
        c.bA[g] += bA[i]! - rA[i]!;
        c.bB[g] += bB[i]! - rB[i]!;
      }
    }
    this.cycle(k + 1, c.bA, c.bB, c.xA, c.xB);
    for (let i = 0; i < l.n; i++) {
      const g = group[i]!;
      if (g >= 0) {
        xA[i] += c.xA[g]!;
        xB[i] += c.xB[g]!;
      }
    }
    l.sweep(xA, xB, bA, bB, false);
  }

  /**
   * Solves A x = b for both channels, starting from x (updated in place), until each residual falls
   * below `tolerance` times its right-hand side's norm.
   */
  solve(bA: Float64Array, bB: Float64Array, xA: Float64Array, xB: Float64Array, tolerance: number, maxIterations: number): SolveReport {
    const l = this.levels[0]!;
    const n = l.n;
    const rA = new Float64Array(n),
      rB = new Float64Array(n),
      zA = new Float64Array(n),
      zB = new Float64Array(n);
    const pA = new Float64Array(n),
      pB = new Float64Array(n),
      qA = new Float64Array(n),
      qB = new Float64Array(n);
    l.multiply(xA, xB, rA, rB);
    let normA = 0,
      normB = 0,
      rrA = 0,
      rrB = 0;
    for (let i = 0; i < n; i++) {
      if (!l.active[i]) {
        rA[i] = 0;
        rB[i] = 0;
        continue;
      }
      rA[i] = bA[i]! - rA[i]!;
      rB[i] = bB[i]! - rB[i]!;
      normA += bA[i]! * bA[i]!;
      normB += bB[i]! * bB[i]!;
      rrA += rA[i]! * rA[i]!;
      rrB += rB[i]! * rB[i]!;
    }
    const stopA = tolerance * tolerance * normA,
      stopB = tolerance * tolerance * normB;
    const converged = (): boolean => rrA <= stopA && rrB <= stopB;
    let iterations = 0;
    if (!converged()) {
      this.cycle(0, rA, rB, zA, zB);
      pA.set(zA);
      pB.set(zB);
      let rzA = 0,
        rzB = 0;
      for (let i = 0; i < n; i++) {
        rzA += rA[i]! * zA[i]!;
        rzB += rB[i]! * zB[i]!;
      }
      while (iterations < maxIterations && !converged()) {
        iterations++;
        const [pqA, pqB] = l.multiply(pA, pB, qA, qB);
        // A channel already solved (or with nothing to do) keeps still: its step length is 0.
        const alphaA = pqA > 0 && rrA > stopA ? rzA / pqA : 0,
          alphaB = pqB > 0 && rrB > stopB ? rzB / pqB : 0;
        rrA = 0;
        rrB = 0;
        for (let i = 0; i < n; i++) {
          xA[i] += alphaA * pA[i]!;
          xB[i] += alphaB * pB[i]!;
          const vA = rA[i]! - alphaA * qA[i]!,
            vB = rB[i]! - alphaB * qB[i]!;
          rA[i] = vA;
          rB[i] = vB;
          rrA += vA * vA;
          rrB += vB * vB;
        }
        if (converged()) break;
        this.cycle(0, rA, rB, zA, zB);
        let nextA = 0,
          nextB = 0;
        for (let i = 0; i < n; i++) {
          nextA += rA[i]! * zA[i]!;
          nextB += rB[i]! * zB[i]!;
        }
        const betaA = rzA > 0 ? nextA / rzA : 0,
          betaB = rzB > 0 ? nextB / rzB : 0;
        rzA = nextA;
        rzB = nextB;
        for (let i = 0; i < n; i++) {
          pA[i] = zA[i]! + betaA * pA[i]!;
          pB[i] = zB[i]! + betaB * pB[i]!;
        }
      }
    }
    const residual = Math.max(normA > 0 ? Math.sqrt(rrA / normA) : 0, normB > 0 ? Math.sqrt(rrB / normB) : 0);
    return { iterations, residual };
  }
}

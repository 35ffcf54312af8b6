/**
 * A small seeded generator of uniform numbers in [0, 1): mulberry32 (common practice), for reproducible
 * samples where no state has to be saved (reference photos, benchmarks, tests). Training, whose random
 * state is checkpointed, uses `training/random.ts` (sfc32).
 * @example
 *   const next = seededUniform(7);
 *   next(); // the same number on every run
 */
export function seededUniform(seed: number): () => number {
  let t = seed >>> 0;
  return () => {
    t = (t + 0x6d2b79f5) >>> 0;
    let r = Math.imul(t ^ (t >>> 15), 1 | t);
    r = (r + Math.imul(r ^ (r >>> 7), 61 | r)) ^ r;
    return ((r ^ (r >>> 14)) >>> 0) / 4294967296;
  };
}

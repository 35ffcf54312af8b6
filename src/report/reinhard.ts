/**
 * Global colour transfer by statistics matching, Reinhard et al. 2001 ("Color Transfer between
 * Images", IEEE CG&A 21(5)): shift and scale each channel so that its mean and standard deviation
 * become the target's. The paper works in Ruderman's l-alpha-beta space; kinhue applies the same
 * formula in CIELAB, whose L*, a*, b* are likewise an opponent, roughly decorrelated space and are
 * the planes every other part of kinhue works on.
 */
import type { LabPlanes } from '../colour/index.js';

/** Per-channel mean and standard deviation of an image (or a set of images) in CIELAB. */
export interface LabStatistics {
  /** Means of L*, a*, b*. */
  mean: [number, number, number];
  /** Population standard deviations of L*, a*, b*. */
  sd: [number, number, number];
}

/** A CIELAB channel by name. */
export type LabChannel = 'L' | 'a' | 'b';

const CHANNELS: readonly LabChannel[] = ['L', 'a', 'b'];

/**
 * Mean and population standard deviation of each CIELAB plane (two-pass in double precision).
 * @example
 * labStatistics({ L: new Float32Array([40, 60]), a: new Float32Array([0, 0]), b: new Float32Array([5, 5]) });
 * // { mean: [50, 0, 5], sd: [10, 0, 0] }
 */
export function labStatistics(lab: LabPlanes): LabStatistics {
  const mean: [number, number, number] = [0, 0, 0];
  const sd: [number, number, number] = [0, 0, 0];
  CHANNELS.forEach((name, c) => {
    const plane = lab[name];
    const n = plane.length;
    if (n === 0) throw new RangeError('labStatistics: the image has no pixels');
    let sum = 0;
    for (let i = 0; i < n; i++) sum += plane[i];
    const m = sum / n;
    let squares = 0;
    for (let i = 0; i < n; i++) {
      const d = plane[i] - m;
      squares += d * d;
    }
    mean[c] = m;
    sd[c] = Math.sqrt(squares / n);
  });
  return { mean, sd };
}

/** Options for {@link reinhardTransfer}. */
export interface ReinhardOptions {
  /** Which channels to match; the others are copied unchanged. Default: all three. */
  channels?: readonly LabChannel[];
  /** The source's statistics when already known; computed from `source` otherwise. */
  sourceStatistics?: LabStatistics;
}

/**
 * Reinhard et al. 2001 statistics matching: out = (x - mean_s) * sd_t / sd_s + mean_t per channel.
 * A source channel with no spread (sd below 1e-6, e.g. a*, b* of a grey photo) cannot be scaled;
 * it becomes the target mean, the only value the statistics justify.
 * @example
 * const target = { mean: [55, 4, 12], sd: [20, 8, 14] };
 * const toned = reinhardTransfer(greyLab, target, { channels: ['a', 'b'] }); // L* kept, a*b* = 4, 12
 */
export function reinhardTransfer(source: LabPlanes, target: LabStatistics, options: ReinhardOptions = {}): LabPlanes {
  const channels = options.channels ?? CHANNELS;
  const stats = options.sourceStatistics ?? labStatistics(source);
  const out: LabPlanes = { L: source.L.slice(), a: source.a.slice(), b: source.b.slice() };
  for (const name of channels) {
    const c = CHANNELS.indexOf(name);
    const plane = out[name];
    const ms = stats.mean[c],
      mt = target.mean[c];
    if (stats.sd[c] < 1e-6) {
      plane.fill(mt);
      continue;
    }
    const scale = target.sd[c] / stats.sd[c];
    for (let i = 0; i < plane.length; i++) plane[i] = (plane[i] - ms) * scale + mt;
  }
  return out;
}

/**
 * Synthetic scan damage drawn onto an L* plane, with its exact mask: dark and bright specks of many
 * sizes and softness (dust), thin curved hairs and fibres, long straight and curved scratches, and
 * film grain. The repair model learns from it and the tests and the benchmark measure against it.
 * Every element is an opacity map composited towards one L*; a pixel belongs to the mask when the
 * damage moved its L* by more than MASK_DELTA (fainter changes cannot be seen, so nothing should
 * repair them). Grain is part of the photograph, never of the mask.
 */
import type { Random } from '../training/index.js';

/** L* change above which a damaged pixel counts as damage (kinhue's own: about one just noticeable step). */
export const MASK_DELTA = 3;

export interface DamageOptions {
  /** Damage elements per megapixel, scaled to the plane's area (at least one of each kind is likely on a crop). Default 60. */
  perMegapixel?: number;
  /** Film grain: the standard deviation of L* noise, drawn from [0, grain]. Default 2.5. */
  grain?: number;
  /** Share of elements that are specks, hairs and scratches. Default [0.6, 0.25, 0.15]. */
  mix?: [number, number, number];
}

export interface Damaged {
  /** The damaged plane (grain included). */
  L: Float32Array;
  /** The undamaged plane with the same grain: what a perfect repair gives back. */
  clean: Float32Array;
  /** 1 where the damage moved L* by more than MASK_DELTA. */
  mask: Uint8Array;
}

/** One element being drawn: its opacity per pixel (max over its parts) and the L* it pulls towards. */
interface Stroke {
  alpha: Float32Array;
  x0: number;
  y0: number;
  x1: number;
  y1: number;
}

/**
 * Adds grain, then damage, to a copy of `L` (w x h). The same generator state gives the same damage.
 * @example
 *   const { L: damaged, mask } = drawDamage(L, 256, 256, new Random(7));
 */
export function drawDamage(L: Float32Array, w: number, h: number, rng: Random, options: DamageOptions = {}): Damaged {
  const clean = Float32Array.from(L);
  addGrain(clean, rng, rng.uniform(0, options.grain ?? 2.5));
  const out = Float32Array.from(clean);
  const count = poisson(rng, ((options.perMegapixel ?? 60) * w * h) / 1e6);
  const [specks, hairs] = options.mix ?? [0.6, 0.25, 0.15];
  const alpha = new Float32Array(w * h);
  for (let k = 0; k < count; k++) {
    const u = rng.next();
    const stroke: Stroke = { alpha, x0: w, y0: h, x1: -1, y1: -1 };
    if (u < specks) drawSpeck(stroke, w, h, rng);
    else if (u < specks + hairs) drawHair(stroke, w, h, rng);
    else drawScratch(stroke, w, h, rng);
    // Dust on a print scans dark, dust on a negative prints white: both kinds, near black or near white.
    const target = rng.next() < 0.5 ? rng.uniform(0, 30) : rng.uniform(75, 100);
    const opacity = rng.uniform(0.55, 1);
    for (let y = Math.max(0, stroke.y0); y <= Math.min(h - 1, stroke.y1); y++) {
      for (let x = Math.max(0, stroke.x0); x <= Math.min(w - 1, stroke.x1); x++) {
        const i = y * w + x;
        const a = alpha[i]!;
        if (a <= 0) continue;
        out[i] = out[i]! + (target - out[i]!) * a * opacity;
        alpha[i] = 0;
      }
    }
  }
  const mask = new Uint8Array(w * h);
  for (let i = 0; i < mask.length; i++) mask[i] = Math.abs(out[i]! - clean[i]!) > MASK_DELTA ? 1 : 0;
  return { L: out, clean, mask };
}

/** Gaussian L* noise of standard deviation `sigma`, in place (Box-Muller). */
export function addGrain(L: Float32Array, rng: Random, sigma: number): void {
  if (sigma <= 0) return;
  for (let i = 0; i < L.length; i += 2) {
    const r = Math.sqrt(-2 * Math.log(1 - rng.next())) * sigma;
    const t = 2 * Math.PI * rng.next();
    L[i] = clampL(L[i]! + r * Math.cos(t));
    if (i + 1 < L.length) L[i + 1] = clampL(L[i + 1]! + r * Math.sin(t));
  }
}

/** A dust speck: an ellipse of radius 0.6-7 px (log-uniform: small ones are commonest), hard or soft-edged. */
function drawSpeck(s: Stroke, w: number, h: number, rng: Random): void {
  const r = Math.exp(rng.uniform(Math.log(0.6), Math.log(7)));
  const soft = rng.uniform(0.3, Math.max(0.4, r * 0.6));
  const cx = rng.uniform(0, w);
  const cy = rng.uniform(0, h);
  const ratio = rng.uniform(0.6, 1);
  const angle = rng.uniform(0, Math.PI);
  const c = Math.cos(angle);
  const sn = Math.sin(angle);
  const reach = r + soft + 1;
  grow(s, cx - reach, cy - reach, cx + reach, cy + reach);
  for (let y = Math.max(0, Math.floor(cy - reach)); y <= Math.min(h - 1, Math.ceil(cy + reach)); y++) {
    for (let x = Math.max(0, Math.floor(cx - reach)); x <= Math.min(w - 1, Math.ceil(cx + reach)); x++) {
      const dx = x + 0.5 - cx;
      const dy = y + 0.5 - cy;
      const u = dx * c + dy * sn;
      const v = (-dx * sn + dy * c) / ratio;
      const d = Math.sqrt(u * u + v * v);
      put(s, x, y, w, coverage(r - d, soft));
    }
  }
}

/** A hair or fibre: a thin curve 15-160 px long whose direction wanders. */
function drawHair(s: Stroke, w: number, h: number, rng: Random): void {
  const length = rng.uniform(15, 160);
  const width = rng.uniform(0.7, 2.4);
  let x = rng.uniform(0, w);
  let y = rng.uniform(0, h);
  let angle = rng.uniform(0, 2 * Math.PI);
  let turn = rng.uniform(-0.15, 0.15);
  const points: number[] = [x, y];
  for (let t = 0; t < length; t += 3) {
    turn += rng.uniform(-0.08, 0.08);
    turn = Math.max(-0.25, Math.min(0.25, turn));
    angle += turn;
    x += 3 * Math.cos(angle);
    y += 3 * Math.sin(angle);
    points.push(x, y);
  }
  drawPolyline(s, w, h, points, width, rng.uniform(0.3, 0.8));
}

/** A scratch: straight or gently bowed, across a large part of the picture, thin and hard-edged. */
function drawScratch(s: Stroke, w: number, h: number, rng: Random): void {
  const length = rng.uniform(0.3, 1) * Math.max(w, h);
  const width = rng.uniform(0.6, 2);
  const angle = rng.next() < 0.6 ? (rng.next() < 0.5 ? 0 : Math.PI / 2) + rng.uniform(-0.15, 0.15) : rng.uniform(0, Math.PI);
  const cx = rng.uniform(0, w);
  const cy = rng.uniform(0, h);
  const bow = rng.next() < 0.5 ? 0 : rng.uniform(-0.15, 0.15) * length;
  const points: number[] = [];
  const steps = Math.max(2, Math.ceil(length / 6));
  for (let k = 0; k <= steps; k++) {
    const t = k / steps - 0.5;
    const off = bow * (1 - 4 * t * t);
    points.push(cx + t * length * Math.cos(angle) - off * Math.sin(angle), cy + t * length * Math.sin(angle) + off * Math.cos(angle));
  }
  drawPolyline(s, w, h, points, width, rng.uniform(0.25, 0.5));
}

function drawPolyline(s: Stroke, w: number, h: number, p: number[], width: number, soft: number): void {
  const half = width / 2;
  const reach = half + soft + 1;
  for (let k = 0; k + 3 < p.length; k += 2) {
    const ax = p[k]!,
      ay = p[k + 1]!,
      bx = p[k + 2]!,
      by = p[k + 3]!;
    grow(s, Math.min(ax, bx) - reach, Math.min(ay, by) - reach, Math.max(ax, bx) + reach, Math.max(ay, by) + reach);
    const dx = bx - ax;
    const dy = by - ay;
    const len2 = dx * dx + dy * dy || 1;
    for (let y = Math.max(0, Math.floor(Math.min(ay, by) - reach)); y <= Math.min(h - 1, Math.ceil(Math.max(ay, by) + reach)); y++) {
      for (let x = Math.max(0, Math.floor(Math.min(ax, bx) - reach)); x <= Math.min(w - 1, Math.ceil(Math.max(ax, bx) + reach)); x++) {
        const px = x + 0.5 - ax;
        const py = y + 0.5 - ay;
        const t = Math.max(0, Math.min(1, (px * dx + py * dy) / len2));
        const d = Math.hypot(px - t * dx, py - t * dy);
        put(s, x, y, w, coverage(half - d, soft));
      }
    }
  }
}

/** Opacity at signed distance `inside` from an edge of softness `soft` (a linear ramp; 0.5 on the edge). */
function coverage(inside: number, soft: number): number {
  return Math.max(0, Math.min(1, inside / Math.max(soft, 0.05) + 0.5));
}

function put(s: Stroke, x: number, y: number, w: number, a: number): void {
  const i = y * w + x;
  if (a > s.alpha[i]!) s.alpha[i] = a;
}

function grow(s: Stroke, x0: number, y0: number, x1: number, y1: number): void {
  s.x0 = Math.min(s.x0, Math.floor(x0));
  s.y0 = Math.min(s.y0, Math.floor(y0));
  s.x1 = Math.max(s.x1, Math.ceil(x1));
  s.y1 = Math.max(s.y1, Math.ceil(y1));
}

function poisson(rng: Random, mean: number): number {
  // Knuth's method for small means; a normal approximation beyond (common practice).
  if (mean > 30)
    return Math.max(0, Math.round(mean + Math.sqrt(mean) * Math.sqrt(-2 * Math.log(1 - rng.next())) * Math.cos(2 * Math.PI * rng.next())));
  const limit = Math.exp(-mean);
  let k = 0;
  let p = rng.next();
  while (p > limit) {
    k++;
    p *= rng.next();
  }
  return k;
}

function clampL(v: number): number {
  return v < 0 ? 0 : v > 100 ? 100 : v;
}

// Tone classification: grey, toned monochrome (with its tint) or colour. Test images are built in
// CIELAB with a known tint, rendered to 8-bit sRGB by the colour module, then measured back.
import { describe, expect, it } from 'vitest';
import { labToSrgb, srgbToLab, type LabPlanes } from '../src/colour/index.js';
import { classifyTone, toneName } from '../src/image/index.js';

const W = 128, H = 96;

/** An 8-bit sRGB image whose L* ramps 5-95 across and whose a*, b* come from `tint(L)`. */
function tonedImage(tint: (L: number, x: number, y: number) => [number, number]): { lab: LabPlanes; meanA: number; meanB: number } {
  const n = W * H;
  const planned: LabPlanes = { L: new Float32Array(n), a: new Float32Array(n), b: new Float32Array(n) };
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const i = y * W + x;
      const L = 5 + (90 * x) / (W - 1);
      const [a, b] = tint(L, x, y);
      planned.L[i] = L;
      planned.a[i] = a;
      planned.b[i] = b;
    }
  }
  const rgb = labToSrgb(planned, new Uint8Array(n * 3), 3);
  const lab = srgbToLab(rgb, 3); // measured after 8-bit rounding, as a decoded scan would be
  let meanA = 0, meanB = 0;
  for (let i = 0; i < n; i++) {
    meanA += lab.a[i]!;
    meanB += lab.b[i]!;
  }
  return { lab, meanA: meanA / n, meanB: meanB / n };
}

/** Strongest in the mid-tones, as toning is: paper white and deep black carry less tint. */
const midtone = (L: number): number => Math.sin((Math.PI * L) / 100);

describe('classifyTone', () => {
  it('a neutral grey ramp is grey with no tint', () => {
    const { lab } = tonedImage(() => [0, 0]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('grey');
    expect(Math.hypot(report.tint.a, report.tint.b)).toBeLessThan(0.5); // 8-bit rounding only
  });

  it('a faint scanner cast (C*ab about 1.5) still counts as grey', () => {
    const { lab } = tonedImage(() => [0.8, 1.2]);
    expect(classifyTone(lab).kind).toBe('grey');
  });

  it('a sepia print is toned, named sepia, with its mean a*, b* as the tint', () => {
    // Sepia: warm brown, roughly a* 5-10, b* 15-25 in the mid-tones (from memory).
    const { lab, meanA, meanB } = tonedImage((L) => [8 * midtone(L), 20 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('sepia');
    expect(report.tint.a).toBeCloseTo(meanA, 1);
    expect(report.tint.b).toBeCloseTo(meanB, 1);
    expect(report.hue).toBeGreaterThan(60);
    expect(report.hue).toBeLessThan(76); // atan2(20, 8) = 68.2 degrees
  });

  it('a cyanotype is toned and named cyanotype', () => {
    // Prussian blue: a* slightly negative, b* strongly negative (from memory).
    const { lab } = tonedImage((L) => [-4 - 2 * midtone(L), -18 - 12 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('cyanotype');
  });

  it('a selenium-toned print is toned and named selenium', () => {
    // Selenium: purple-brown to red-brown, a* above b* (from memory).
    const { lab } = tonedImage((L) => [7 * midtone(L) + 1, 1.5 * midtone(L)]);
    const report = classifyTone(lab);
    expect(report.kind).toBe('toned');
    expect(report.name).toBe('selenium');
  });

  it('a colour photograph (hues all round the circle) is colour', () => {
    // Hue turns with position: every hue at chroma 25, as in a scene with sky, foliage and skin.
    const { lab } = tonedImage((L, x, y) => {
      const h = ((x * 7 + y * 13) % 360) * (Math.PI / 180);
      return [25 * Math.cos(h), 25 * Math.sin(h)];
    });
    const report = classifyTone(lab);
    expect(report.kind).toBe('colour');
    expect(report.name).toBeUndefined();
    expect(report.spread).toBeGreaterThan(15);
  });

  it('two strong opposing colours are colour, not a tint', () => {
    const { lab } = tonedImage((L, x) => (x < W / 2 ? [40, 30] : [-40, 20]));
    expect(classifyTone(lab).kind).toBe('colour');
  });
});

describe('toneName', () => {
  it('names hue bands', () => {
    expect(toneName(68, 20)).toBe('sepia');
    expect(toneName(262, 25)).toBe('cyanotype');
    expect(toneName(262, 4)).toBe('blue-black');
    expect(toneName(10, 6)).toBe('selenium');
    expect(toneName(345, 6)).toBe('selenium');
    expect(toneName(140, 6)).toBe('green');
  });
});

import { describe, expect, it } from 'vitest';
import {
  CLEARLY_COLOURED_CHROMA,
  FALSE_HUE_DEGREES,
  NEAR_NEUTRAL_CHROMA,
  RIGHT_HUE_DEGREES,
  clearlyColouredShare,
  hueAgreement,
  hueDifference,
  meanOfPresent,
  type LabPlanes,
} from '../src/colour/index.js';

// Right hue, false colour and left grey (thresholds of kinhue's own, issue 17). Every expected value
// below is counted by hand from the pixels written out here: C*ab = sqrt(a*² + b*²) and
// h_ab = atan2(b*, a*) as CIE 15:2004 defines them.

/** An image of pixels given as [a*, b*] pairs (L* 50 throughout: the figures ignore L*). */
function image(pixels: [number, number][]): LabPlanes {
  return {
    L: new Float32Array(pixels.length).fill(50),
    a: Float32Array.from(pixels.map((p) => p[0])),
    b: Float32Array.from(pixels.map((p) => p[1])),
  };
}

/** a*, b* of chroma `c` at hue angle `h` degrees. */
function polar(c: number, h: number): [number, number] {
  return [c * Math.cos((h * Math.PI) / 180), c * Math.sin((h * Math.PI) / 180)];
}

describe('hue thresholds', () => {
  it("are the issue's values", () => {
    // kinhue issue 17, "Figures": C*ab >= 15 clearly coloured, < 8 near-neutral, within 30 degrees right, beyond 60 false.
    expect([CLEARLY_COLOURED_CHROMA, NEAR_NEUTRAL_CHROMA, RIGHT_HUE_DEGREES, FALSE_HUE_DEGREES]).toEqual([15, 8, 30, 60]);
  });
});

describe('hueDifference', () => {
  it('wraps at 360 degrees', () => {
    // Worked by hand: 350 and 10 are 20 apart across 0; 170 and -170 are 20 apart across 180.
    expect(hueDifference(350, 10)).toBeCloseTo(20, 12);
    expect(hueDifference(10, 350)).toBeCloseTo(20, 12);
    expect(hueDifference(170, -170)).toBeCloseTo(20, 12);
    expect(hueDifference(0, 180)).toBe(180);
    expect(hueDifference(-90, 90)).toBe(180);
    expect(hueDifference(720 + 5, 0)).toBe(5);
  });
});

describe('hueAgreement', () => {
  it('counts a hue within 30 degrees as right, 29.9 in and 30.1 out, also across 0', () => {
    const original = image([polar(20, 0), polar(20, 0), polar(20, 350), polar(20, 350), polar(20, 100)]);
    const result = image([polar(20, 29.9), polar(20, 30.1), polar(20, 19.9), polar(20, 20.1), polar(20, 100)]);
    // Right: pixel 1 (29.9), pixel 3 (350 -> 19.9 is 29.9 across 0), pixel 5 (same hue); 3 of 5 clearly coloured.
    const f = hueAgreement(result, original);
    expect(f.colouredPixels).toBe(5);
    expect(f.rightHue).toBeCloseTo(60, 10);
    expect(f.leftGrey).toBe(0);
    expect(f.falseColour).toBe(0); // 30.1 degrees off is neither right nor false
  });

  it('takes C*ab 15 as clearly coloured and 8 as coloured enough, as >= says', () => {
    // Originals of C* exactly 15 ((9, 12): a 3-4-5 triangle; (15, 0); (0, 15)) are clearly coloured; 14.99 is not.
    // A result of C* exactly 8 counts as coloured (right, as its hue agrees); 7.99 is left grey.
    const original = image([
      [9, 12],
      [15, 0],
      [15, 0],
      [14.99, 0],
      [0, 15],
    ]);
    const result = image([
      [9, 12],
      [8, 0],
      [7.99, 0],
      [15, 0],
      [0, 0],
    ]);
    // Right: pixels 1 and 2; left grey: pixels 3 and 5; pixel 4 is not clearly coloured, and its result
    // (C* 15, same hue) is no false colour.
    const f = hueAgreement(result, original);
    expect(f.colouredPixels).toBe(4);
    expect(f.rightHue).toBe(50);
    expect(f.leftGrey).toBe(50);
    expect(f.falseColour).toBe(0);
  });

  it('counts false colour over all pixels: colour on a near-neutral original, or a hue more than 60 degrees off', () => {
    const original = image([
      [0, 0], // neutral, result C* 15: false
      [7.99, 0], // near-neutral (C* < 8), result C* 15: false
      [8, 0], // C* 8 is not near-neutral, result at the same hue: not false
      [20, 0],
      [20, 0], // result 59.9 degrees off: not false; 60.1 off: false
      [0, 0], // neutral, result C* 14.99 (below 15): not false
      polar(20, 170),
      polar(20, 170), // result at -130.1 (229.9, 59.9 off across 180): not false; at -129.9 (60.1 off): false
      [0, 0],
      [0, 0],
    ]);
    const result = image([
      [15, 0],
      [0, 15],
      [15, 0],
      polar(30, 59.9),
      polar(30, 60.1),
      [14.99, 0],
      polar(30, -130.1),
      polar(30, -129.9),
      [0, 0],
      [0, 0],
    ]);
    const f = hueAgreement(result, original);
    // False: pixels 1, 2, 5 and 8 of 10.
    expect(f.pixels).toBe(10);
    expect(f.falseColour).toBe(40);
    // Clearly coloured: pixels 4, 5, 7 and 8; none within 30 degrees, none grey.
    expect(f.colouredPixels).toBe(4);
    expect(f.rightHue).toBe(0);
    expect(f.leftGrey).toBe(0);
  });

  it('gives grey a right hue of 0 and left grey of 100% by construction', () => {
    const original = image([polar(40, 10), polar(25, 200), [3, 4], polar(60, 300)]);
    const grey = image([
      [0, 0],
      [0, 0],
      [0, 0],
      [0, 0],
    ]);
    const f = hueAgreement(grey, original);
    expect(f).toEqual({ rightHue: 0, falseColour: 0, leftGrey: 100, colouredPixels: 3, pixels: 4 });
    // And the original against itself: every clearly coloured pixel right, nothing false.
    expect(hueAgreement(original, original)).toEqual({ rightHue: 100, falseColour: 0, leftGrey: 0, colouredPixels: 3, pixels: 4 });
  });

  it('reports no right hue or left grey for an image with no clearly coloured pixel', () => {
    const original = image([
      [0, 0],
      [5, 5],
      [10, 0],
    ]);
    const f = hueAgreement(
      image([
        [0, 20],
        [0, 0],
        [10, 0],
      ]),
      original,
    );
    expect(f.rightHue).toBeNull();
    expect(f.leftGrey).toBeNull();
    expect(f.colouredPixels).toBe(0);
    expect(f.falseColour).toBeCloseTo(100 / 3, 10);
  });

  it('gives the share of clearly coloured pixels, 15 included', () => {
    // (9, 12) and (0, -15) have C* 15; (14.99, 0) and (0, 0) do not: 2 of 4.
    expect(
      clearlyColouredShare(
        image([
          [9, 12],
          [0, -15],
          [14.99, 0],
          [0, 0],
        ]),
      ),
    ).toBe(50);
  });

  it('refuses images of different sizes', () => {
    expect(() =>
      hueAgreement(
        image([[0, 0]]),
        image([
          [0, 0],
          [1, 1],
        ]),
      ),
    ).toThrow(RangeError);
  });
});

describe('meanOfPresent', () => {
  it('skips missing figures and says how many photos the mean rests on', () => {
    expect(meanOfPresent([40, null, 60, undefined])).toEqual({ mean: 50, photos: 2 });
    expect(meanOfPresent([null, null])).toEqual({ mean: null, photos: 0 });
    expect(meanOfPresent([])).toEqual({ mean: null, photos: 0 });
  });
});

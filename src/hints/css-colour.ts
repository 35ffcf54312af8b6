/**
 * The CSS colour syntax a hints file accepts: `#rgb`, `#rrggbb` and `rgb(r, g, b)` (commas or spaces,
 * numbers 0-255 or percentages), as in CSS Color Module Level 4. Nothing else: named colours and other
 * spaces would make hints files depend on a table the reader cannot see.
 */

/** An sRGB colour, channels 0-255 (fractions allowed). */
export type Rgb = readonly [number, number, number];

const HEX = /^#([0-9a-f]{3}|[0-9a-f]{6})$/i;
const RGB = /^rgb\(\s*(.*?)\s*\)$/i;
const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)(e[+-]?\d+)?%?$/i;

/**
 * Reads a CSS colour; returns null when the text is not one of the accepted forms.
 *
 * @example
 *   parseCssColour('#2f5d3a');            // [47, 93, 58]
 *   parseCssColour('rgb(180, 40, 30)');   // [180, 40, 30]
 */
export function parseCssColour(text: string): Rgb | null {
  const s = text.trim();
  const hex = HEX.exec(s);
  if (hex) {
    const digits = hex[1]!;
    const full = digits.length === 3 ? [...digits].map((d) => d + d).join('') : digits;
    return [0, 2, 4].map((i) => parseInt(full.slice(i, i + 2), 16)) as unknown as Rgb;
  }
  const rgb = RGB.exec(s);
  if (!rgb) return null;
  const parts = rgb[1]!.includes(',') ? rgb[1]!.split(',').map((p) => p.trim()) : rgb[1]!.split(/\s+/);
  if (parts.length !== 3 || !parts.every((p) => NUMBER.test(p))) return null;
  // CSS mixes of numbers and percentages are invalid; out-of-range values are clamped (CSS Color 4, 5.1).
  const percent = parts.map((p) => p.endsWith('%'));
  if (percent.some((p) => p !== percent[0])) return null;
  const values = parts.map((p) => (p.endsWith('%') ? (parseFloat(p) * 255) / 100 : parseFloat(p)));
  return values.map((v) => Math.min(255, Math.max(0, v))) as unknown as Rgb;
}

/**
 * Writes an sRGB colour as `#rrggbb`, rounding each channel.
 *
 * @example
 *   formatHex([47, 93, 58]); // '#2f5d3a'
 */
export function formatHex(rgb: Rgb): string {
  return '#' + rgb.map((v) => Math.round(Math.min(255, Math.max(0, v))).toString(16).padStart(2, '0')).join('');
}

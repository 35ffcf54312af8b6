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
/** Longer texts are not colours, and are not given to the patterns above (whose cost grows with the square of the length). */
const MAX_LENGTH = 100;

/** The three channels of an `rgb()` colour on the 0-255 scale, before any range check; null when not that form. */
function rgbChannels(text: string): number[] | null {
  if (text.length > MAX_LENGTH) return null;
  const rgb = RGB.exec(text.trim());
  if (!rgb) return null;
  const parts = rgb[1]!.includes(',') ? rgb[1]!.split(',').map((p) => p.trim()) : rgb[1]!.split(/\s+/);
  if (parts.length !== 3 || !parts.every((p) => NUMBER.test(p))) return null;
  // CSS mixes of numbers and percentages are invalid.
  const percent = parts.map((p) => p.endsWith('%'));
  if (percent.some((p) => p !== percent[0])) return null;
  return parts.map((p) => (p.endsWith('%') ? (parseFloat(p) * 255) / 100 : parseFloat(p)));
}

/**
 * Reads a CSS colour; returns null when the text is not one of the accepted forms, or is an `rgb()` with a
 * channel outside 0-255 (0%-100%). CSS would clamp such a channel (CSS Color 4, 5.1); a hints file states
 * a known colour, so a value out of range is a mistake to report (see `outOfRange`), not a colour to guess.
 *
 * @example
 *   parseCssColour('#2f5d3a');            // [47, 93, 58]
 *   parseCssColour('rgb(180, 40, 30)');   // [180, 40, 30]
 *   parseCssColour('rgb(300, 0, 0)');     // null
 */
export function parseCssColour(text: string): Rgb | null {
  if (text.length > MAX_LENGTH) return null;
  const hex = HEX.exec(text.trim());
  if (hex) {
    const digits = hex[1]!;
    const full = digits.length === 3 ? [...digits].map((d) => d + d).join('') : digits;
    return [0, 2, 4].map((i) => parseInt(full.slice(i, i + 2), 16)) as unknown as Rgb;
  }
  const values = rgbChannels(text);
  if (!values || values.some((v) => v < 0 || v > 255)) return null;
  return values as unknown as Rgb;
}

/**
 * True for an `rgb()` colour written correctly but with a channel outside 0-255 (or 0%-100%).
 *
 * @example
 *   outOfRange('rgb(120%, 0, 0)'); // true
 *   outOfRange('rgb(12, 0, 0)');   // false
 */
export function outOfRange(text: string): boolean {
  return rgbChannels(text)?.some((v) => v < 0 || v > 255) ?? false;
}

/**
 * Writes an sRGB colour as `#rrggbb`, rounding each channel.
 *
 * @example
 *   formatHex([47, 93, 58]); // '#2f5d3a'
 */
export function formatHex(rgb: Rgb): string {
  return (
    '#' +
    rgb
      .map((v) =>
        Math.round(Math.min(255, Math.max(0, v)))
          .toString(16)
          .padStart(2, '0'),
      )
      .join('')
  );
}

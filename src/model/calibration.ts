/**
 * Whether confidence means something: the mean a*b* error of the most and least confident
 * quarters of pixels (issue 3 asks that the first be lower), for tests, scoring and model cards.
 */

export interface ConfidenceQuarters {
  /** Mean error of the quarter of pixels with the highest confidence. */
  mostConfident: number;
  /** Mean error of the quarter with the lowest confidence. */
  leastConfident: number;
  /** Pixels in each quarter. */
  pixels: number;
}

/**
 * Splits pixels by confidence and averages their errors (e.g. the a*b* distance to the original)
 * over the top and bottom quarters. Ties keep input order.
 * @example
 * const q = confidenceQuarters(conf, err);
 * q.mostConfident < q.leastConfident; // confidence ranks errors
 */
export function confidenceQuarters(confidence: ArrayLike<number>, error: ArrayLike<number>): ConfidenceQuarters {
  const n = confidence.length;
  if (error.length !== n) throw new RangeError(`confidenceQuarters: ${n} confidences but ${error.length} errors`);
  const quarter = Math.floor(n / 4);
  if (quarter === 0) throw new RangeError('confidenceQuarters: needs at least 4 pixels');
  const order = Array.from({ length: n }, (_, i) => i).sort((i, j) => confidence[j] - confidence[i] || i - j);
  let top = 0;
  let bottom = 0;
  for (let k = 0; k < quarter; k++) {
    top += error[order[k]];
    bottom += error[order[n - 1 - k]];
  }
  return { mostConfident: top / quarter, leastConfident: bottom / quarter, pixels: quarter };
}

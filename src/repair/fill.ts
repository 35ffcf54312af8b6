/**
 * Putting values into the masked pixels only. `keepUnmasked` is the one rule of repair: every pixel the
 * mask does not mark is the scan's own, bit for bit. `medianFill` is the classical baseline: the mask is
 * filled from its edge inwards, layer by layer, each pixel taking the median of the known pixels around
 * it (an onion-peel median fill, common practice for dust removal).
 */

/**
 * `repaired` where the mask is set, `original` elsewhere, into a new array of the original's type.
 * @example
 *   const out = keepUnmasked(scan, candidate, mask); // out[i] === scan[i] wherever mask[i] === 0
 */
export function keepUnmasked<T extends Float32Array | Uint8Array | Uint16Array>(original: T, repaired: ArrayLike<number>, mask: Uint8Array): T {
  if (original.length !== mask.length || repaired.length !== mask.length) {
    throw new RangeError(`keepUnmasked: ${original.length} original, ${repaired.length} repaired and ${mask.length} mask values`);
  }
  const out = original.slice() as T;
  for (let i = 0; i < mask.length; i++) if (mask[i]) out[i] = repaired[i]!;
  return out;
}

/**
 * Fills the masked pixels of `L` (w x h) by the onion-peel median of known neighbours within `radius`.
 * Pixels outside the mask are returned unchanged.
 * @example
 *   const filled = medianFill(L, width, height, mask);
 */
export function medianFill(L: Float32Array, w: number, h: number, mask: Uint8Array, radius = 2): Float32Array {
  const out = Float32Array.from(L);
  const known = Uint8Array.from(mask, (m) => (m ? 0 : 1));
  let todo: number[] = [];
  for (let i = 0; i < mask.length; i++) if (mask[i]) todo.push(i);
  const values: number[] = [];
  while (todo.length) {
    const layer: Array<[number, number]> = [];
    const rest: number[] = [];
    for (const p of todo) {
      const x = p % w;
      const y = (p - x) / w;
      values.length = 0;
      for (let yy = Math.max(0, y - radius); yy <= Math.min(h - 1, y + radius); yy++) {
        for (let xx = Math.max(0, x - radius); xx <= Math.min(w - 1, x + radius); xx++) {
          const q = yy * w + xx;
          if (known[q]) values.push(out[q]!);
        }
      }
      if (values.length) layer.push([p, median(values)]);
      else rest.push(p);
    }
    // A mask that covers everything has nothing to fill from: leave it as it is.
    if (!layer.length) break;
    for (const [p, v] of layer) {
      out[p] = v;
      known[p] = 1;
    }
    todo = rest;
  }
  return out;
}

function median(values: number[]): number {
  values.sort((a, b) => a - b);
  const m = values.length >> 1;
  return values.length % 2 ? values[m]! : 0.5 * (values[m - 1]! + values[m]!);
}

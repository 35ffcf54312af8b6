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
export function keepUnmasked<T extends Float32Array | Uint8Array | Uint16Array>(
  original: T,
  repaired: ArrayLike<number>,
  mask: Uint8Array,
): T {
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
  const out = L.slice();
  const known = new Uint8Array(mask.length);
  let count = 0;
  for (let i = 0; i < mask.length; i++) {
    if (mask[i]) count++;
    else known[i] = 1;
  }
  let todo = new Int32Array(count);
  for (let i = 0, k = 0; i < mask.length; i++) if (mask[i]) todo[k++] = i;
  const values = new Float64Array((2 * radius + 1) ** 2);
  const layerAt = new Int32Array(count);
  const layerValue = new Float32Array(count);
  while (todo.length) {
    let layer = 0;
    let rest = 0;
    for (let t = 0; t < todo.length; t++) {
      const p = todo[t]!;
      const x = p % w;
      const y = (p - x) / w;
      let n = 0;
      for (let yy = Math.max(0, y - radius); yy <= Math.min(h - 1, y + radius); yy++) {
        for (let xx = Math.max(0, x - radius), q = yy * w + xx; xx <= Math.min(w - 1, x + radius); xx++, q++) {
          if (!known[q]) continue;
          // Insertion into the sorted run so far: at most 25 values.
          const v = out[q]!;
          let j = n++;
          while (j > 0 && values[j - 1]! > v) {
            values[j] = values[j - 1]!;
            j--;
          }
          values[j] = v;
        }
      }
      if (n) {
        layerAt[layer] = p;
        layerValue[layer++] = n % 2 ? values[n >> 1]! : 0.5 * (values[(n >> 1) - 1]! + values[n >> 1]!);
      } else todo[rest++] = p;
    }
    // A mask that covers everything has nothing to fill from: leave it as it is.
    if (!layer) break;
    for (let k = 0; k < layer; k++) {
      out[layerAt[k]!] = layerValue[k]!;
      known[layerAt[k]!] = 1;
    }
    todo = todo.subarray(0, rest);
  }
  return out;
}

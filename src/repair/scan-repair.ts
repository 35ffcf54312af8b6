/**
 * Repair of a whole decoded scan: dust, hairs and scratches found on its L* and replaced there, the
 * rest left as the scan's own samples, bit for bit. The scan is worked in bands of rows with a margin
 * above and below (so no full-size float plane is ever made); only a band's own rows are written.
 * A replaced pixel gets the grey whose L* is the fill's, in the scan's own depth (on an RGB scan, the
 * same value in each channel; alpha is kept).
 */
import { greyToLightness, lightnessToGrey } from '../colour/index.js';
import type { Pixels } from '../image/index.js';
import { detectDamage } from './detector.js';
import { medianFill } from './fill.js';
import { networkRepair } from './network-repair.js';
import type { RepairModel } from './repair-model.js';

export interface ScanRepairOptions {
  /** The repair network; without it, the classical detector finds the damage. */
  model?: RepairModel;
  /** What goes into the masked pixels: the network's L* or the median of their surroundings. Default: the network's when there is one. */
  fill?: 'network' | 'median';
}

/** How a repair with these options is done, as records name it. */
export function repairMethod(options: ScanRepairOptions = {}): string {
  if (!options.model) return 'top-hat detection, median fill';
  const found = options.model.meta.detection === 'confirmed' ? 'top-hat detection confirmed by the' : 'top-hat candidates decided by the';
  return `${found} ${options.model.meta.name} network, ${options.fill === 'median' ? 'median' : 'network'} fill`;
}

export interface ScanRepair {
  /** The repaired scan: a copy of the input's samples with the masked pixels replaced. */
  pixels: Pixels;
  /** 1 where a pixel was replaced (full size, row-major). */
  mask: Uint8Array;
  /** Pixels replaced. */
  repaired: number;
}

/** Rows added above and below each band: the detector's reach (top-hat and texture windows), with room to grow. */
const MARGIN_ROWS = 48;

/**
 * Repairs a decoded scan. The input is not changed.
 * @example
 *   const { pixels, mask, repaired } = repairScan(decoded.pixels);
 */
export function repairScan(px: Pixels, options: ScanRepairOptions = {}): ScanRepair {
  const { width: w, height: h, channels } = px;
  const data = px.data.slice();
  const mask = new Uint8Array(w * h);
  const bandRows = Math.max(64, Math.floor((1 << 21) / w));
  const per = w * channels;
  let repaired = 0;
  for (let y0 = 0; y0 < h; y0 += bandRows) {
    const y1 = Math.min(h, y0 + bandRows);
    const top = Math.max(0, y0 - MARGIN_ROWS);
    const bottom = Math.min(h, y1 + MARGIN_ROWS);
    const rows = bottom - top;
    const L = greyToLightness(px.data.subarray(top * per, bottom * per), channels);
    let found: Uint8Array;
    let filled: Float32Array;
    if (options.model) {
      const net = networkRepair(L, w, rows, options.model);
      found = net.mask;
      filled = options.fill === 'median' ? medianFill(L, w, rows, found) : net.filled;
    } else {
      found = detectDamage(L, w, rows).mask;
      filled = medianFill(L, w, rows, found);
    }
    const coreStart = (y0 - top) * w;
    const coreEnd = (y1 - top) * w;
    const values: number[] = [];
    const at: number[] = [];
    for (let i = coreStart; i < coreEnd; i++) {
      if (!found[i]) continue;
      values.push(filled[i]!);
      at.push(top * w + i);
    }
    const grey = lightnessToGrey(
      Float32Array.from(values),
      px.depth === 16 ? new Uint16Array(values.length) : new Uint8Array(values.length),
    );
    for (let k = 0; k < at.length; k++) {
      const p = at[k]!;
      mask[p] = 1;
      const colourChannels = channels >= 3 ? 3 : 1;
      for (let c = 0; c < colourChannels; c++) data[p * channels + c] = grey[k]!;
    }
    repaired += at.length;
  }
  return { pixels: { ...px, data }, mask, repaired };
}

/**
 * Raw EXIF blocks as libvips hands them over: a TIFF structure (CIPA DC-008 / TIFF 6.0), with or
 * without the "Exif\0\0" prefix JPEG and some WebP writers put in front. kinhue copies the block
 * as it is and only rewrites the few fields that describe pixels it changed.
 */

const EXIF_PREFIX = Buffer.from('Exif\0\0', 'latin1');
const TAG_ORIENTATION = 0x0112;
const TAG_EXIF_IFD = 0x8769;
const TAG_PIXEL_X = 0xa002;
const TAG_PIXEL_Y = 0xa003;
const TYPE_SHORT = 3;
const TYPE_LONG = 4;

/** The TIFF structure inside an EXIF block (a copy, without the "Exif\0\0" prefix). */
export function exifTiffData(exif: Buffer): Buffer {
  const start = exif.subarray(0, 6).equals(EXIF_PREFIX) ? 6 : 0;
  return Buffer.from(exif.subarray(start));
}

/** The same block with the "Exif\0\0" prefix, as a JPEG APP1 segment wants it. */
export function withExifPrefix(tiff: Buffer): Buffer {
  return Buffer.concat([EXIF_PREFIX, tiff]);
}

interface Entry {
  tag: number;
  type: number;
  count: number;
  /** Offset of the 4-byte value field within the TIFF data. */
  valueAt: number;
}

class TiffView {
  readonly little: boolean;
  constructor(readonly buf: Buffer) {
    const order = buf.subarray(0, 2).toString('latin1');
    if (buf.length < 8 || (order !== 'II' && order !== 'MM')) throw new Error('not a TIFF structure');
    this.little = order === 'II';
    if (this.u16(2) !== 42) throw new Error('not a TIFF structure');
  }
  u16(at: number): number {
    return this.little ? this.buf.readUInt16LE(at) : this.buf.readUInt16BE(at);
  }
  u32(at: number): number {
    return this.little ? this.buf.readUInt32LE(at) : this.buf.readUInt32BE(at);
  }
  setU16(at: number, v: number): void {
    if (this.little) this.buf.writeUInt16LE(v, at);
    else this.buf.writeUInt16BE(v, at);
  }
  setU32(at: number, v: number): void {
    if (this.little) this.buf.writeUInt32LE(v, at);
    else this.buf.writeUInt32BE(v, at);
  }
  entries(ifdOffset: number): Entry[] {
    if (ifdOffset < 8 || ifdOffset + 2 > this.buf.length) return [];
    const n = this.u16(ifdOffset);
    const out: Entry[] = [];
    for (let i = 0; i < n; i++) {
      const at = ifdOffset + 2 + i * 12;
      if (at + 12 > this.buf.length) break;
      out.push({ tag: this.u16(at), type: this.u16(at + 2), count: this.u32(at + 4), valueAt: at + 8 });
    }
    return out;
  }
  /** Writes an unsigned value into a SHORT or LONG entry with count 1; other entries are left alone. */
  setNumber(entry: Entry, value: number): void {
    if (entry.count !== 1) return;
    if (entry.type === TYPE_SHORT && value <= 0xffff) this.setU16(entry.valueAt, value);
    else if (entry.type === TYPE_LONG) this.setU32(entry.valueAt, value);
  }
}

/** The EXIF Orientation (1-8) recorded in a block, or undefined. */
export function exifOrientation(exif: Buffer): number | undefined {
  try {
    const view = new TiffView(exifTiffData(exif));
    const entry = view.entries(view.u32(4)).find((e) => e.tag === TAG_ORIENTATION);
    return entry && entry.type === TYPE_SHORT ? view.u16(entry.valueAt) : undefined;
  } catch {
    return undefined;
  }
}

/**
 * Prepares a source's EXIF block for an output whose pixels are already upright: Orientation set
 * to 1 (top-left) and PixelXDimension/PixelYDimension set to the output size. Returns the TIFF
 * structure without prefix, or undefined when the block cannot be parsed (then it is not carried).
 *
 * @example
 * const tiff = exifForUprightOutput(decoded.exif, 3000, 2000);
 */
export function exifForUprightOutput(exif: Buffer, width: number, height: number): Buffer | undefined {
  let view: TiffView;
  try {
    view = new TiffView(exifTiffData(exif));
  } catch {
    return undefined;
  }
  const ifd0 = view.entries(view.u32(4));
  for (const entry of ifd0) {
    if (entry.tag === TAG_ORIENTATION) view.setNumber(entry, 1);
    if (entry.tag === TAG_EXIF_IFD && entry.count === 1) {
      for (const sub of view.entries(view.u32(entry.valueAt))) {
        if (sub.tag === TAG_PIXEL_X) view.setNumber(sub, width);
        if (sub.tag === TAG_PIXEL_Y) view.setNumber(sub, height);
      }
    }
  }
  return view.buf;
}

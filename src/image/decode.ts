/**
 * Decoding: any image sharp reads becomes one plain, upright, sRGB `Pixels` object plus the
 * metadata worth carrying to the output. Everything after this works on typed arrays.
 */
import { open, stat } from 'node:fs/promises';
import sharp, { type Metadata, type Sharp, type SharpOptions } from 'sharp';
import { decodeFailure, emptyFile, unreadable } from './failures.js';
import { checkPixelLimit, resolveMaxPixels, sharpLimit } from './limits.js';
import { samplesFromBuffer, type BitDepth, type ChannelCount, type Pixels } from './pixels.js';

/** Container formats sharp can hand us (its `metadata().format` names). */
export type ImageFormat = 'jpeg' | 'png' | 'tiff' | 'webp' | 'gif' | 'heif' | 'jp2' | 'jxl' | 'svg' | 'raw' | string;

export interface DecodeOptions {
  /** Pixel limit (width x height) for this call; default from KINHUE_MAX_PIXELS or 300 MP. */
  maxPixels?: number;
}

export interface DecodedImage {
  /** The file it came from (or the name given to `decodeBuffer`). */
  path: string;
  format: ImageFormat;
  /** Upright (EXIF orientation applied), sRGB, 16-bit where the source had more than 8 bits. */
  pixels: Pixels;
  /** The source's raw EXIF block, as found (its Orientation still says how the source was stored). */
  exif?: Buffer;
  /** The source's embedded ICC profile, to carry over to outputs. */
  icc?: Buffer;
  hasIcc: boolean;
  /** Pages in the file; only page 1 is decoded. */
  pageCount: number;
  /** The depth of `pixels`: 16 when the source had 16 (or more) bits per sample. */
  bitDepth: BitDepth;
  /** The source's EXIF orientation (1-8) before it was applied, 1 when absent. */
  orientation: number;
  /** Things the caller should tell the person, e.g. that only page 1 of a multi-page TIFF was used. */
  warnings: string[];
}

/**
 * libvips checks for: 'error' aborts on truncated or corrupt pixel data (libvips otherwise decodes
 * a truncated JPEG with grey where data is missing) but tolerates harmless warnings such as
 * unknown TIFF tags, which scanner software writes often.
 */
const FAIL_ON = 'error' as const;

const HIGH_DEPTHS = new Set(['ushort', 'short', 'uint', 'int', 'float', 'double', 'complex', 'dpcomplex']);

/**
 * Decodes an image file into upright sRGB pixels (page 1 of multi-page files).
 * Throws InputError with KH_UNREADABLE, KH_EMPTY_FILE, KH_NOT_AN_IMAGE, KH_CORRUPT_IMAGE or KH_TOO_LARGE.
 *
 * @example
 * const img = await decodeImage('scans/1952-wedding.tif');
 * img.pixels; // { width, height, channels: 1, depth: 16, data: Uint16Array }
 */
export async function decodeImage(path: string, options: DecodeOptions = {}): Promise<DecodedImage> {
  let size: number;
  try {
    const info = await stat(path);
    if (info.isDirectory()) throw Object.assign(new Error('is a directory'), { code: 'EISDIR' });
    size = info.size;
    // stat succeeds without read permission; opening proves we can read.
    await (await open(path, 'r')).close();
  } catch (error) {
    throw unreadable(path, error);
  }
  if (size === 0) throw emptyFile(path);
  return decodeInput(path, path, options);
}

/**
 * Decodes an image held in memory; `name` is used in messages and as `path`.
 *
 * @example
 * const img = await decodeBuffer(await readFile('a.jpg'), 'a.jpg');
 */
export async function decodeBuffer(buf: Buffer, name: string, options: DecodeOptions = {}): Promise<DecodedImage> {
  if (buf.length === 0) throw emptyFile(name);
  return decodeInput(buf, name, options);
}

async function decodeInput(input: string | Buffer, name: string, options: DecodeOptions): Promise<DecodedImage> {
  const maxPixels = resolveMaxPixels(options.maxPixels);
  let meta: Metadata;
  try {
    // Header only: checkPixelLimit below says more than sharp's limit error would.
    meta = await sharp(input, { failOn: FAIL_ON, limitInputPixels: false }).metadata();
  } catch (error) {
    throw decodeFailure(name, error);
  }
  checkPixelLimit(name, meta.width, meta.height, maxPixels);

  const warnings: string[] = [];
  const pageCount = meta.pages ?? 1;
  if (pageCount > 1) warnings.push(`has ${pageCount} pages; only page 1 is used`);
  const bitDepth: BitDepth = HIGH_DEPTHS.has(meta.depth) ? 16 : 8;
  if (bitDepth === 16 && meta.depth !== 'ushort') warnings.push(`has ${meta.depth} samples; converted to 16 bits`);
  const grey = meta.space === 'b-w' || meta.space === 'grey16';

  let pixels: Pixels;
  try {
    pixels = await decodePixels(input, meta, grey, bitDepth, maxPixels, warnings);
  } catch (error) {
    throw decodeFailure(name, error);
  }
  return {
    path: name,
    format: meta.format,
    pixels,
    exif: meta.exif,
    icc: meta.icc,
    hasIcc: meta.hasProfile === true && meta.icc !== undefined,
    pageCount,
    bitDepth,
    orientation: meta.orientation ?? 1,
    warnings,
  };
}

async function decodePixels(
  input: string | Buffer,
  meta: Metadata,
  grey: boolean,
  depth: BitDepth,
  maxPixels: number,
  warnings: string[],
): Promise<Pixels> {
  const options: SharpOptions = { failOn: FAIL_ON, limitInputPixels: maxPixels, autoOrient: true, page: 0, pages: 1 };
  let pipeline: Sharp = sharp(input, options);
  pipeline.on('warning', (message: string) => warnings.push(`decoder: ${String(message).trim()}`));
  pipeline = pipeline.toColourspace(depth === 16 ? (grey ? 'grey16' : 'rgb16') : grey ? 'b-w' : 'srgb');
  // sharp converts 8-bit sources with a profile to sRGB itself, but converts 16-bit RGB ones to
  // Display P3 (its 16-bit working space) and leaves 16-bit grey untouched; a final transform to
  // sRGB (from the image's now-attached profile) gives sRGB values in every case.
  const fixProfile = meta.hasProfile === true && depth === 16;
  if (fixProfile) pipeline = pipeline.withIccProfile('srgb', { attach: false });
  const { data, info } = await pipeline.raw({ depth: depth === 16 ? 'ushort' : 'uchar' }).toBuffer({ resolveWithObject: true });
  let channels = info.channels as ChannelCount;
  let samples = samplesFromBuffer(data, depth);
  if (grey && channels >= 3) {
    // A grey profile turned grey into RGB; fold it back to one channel (libvips' own luminance).
    const folded = await sharp(samples, {
      raw: { width: info.width, height: info.height, channels: channels as 3 | 4 },
      ...sharpLimit(maxPixels),
    })
      .toColourspace(depth === 16 ? 'grey16' : 'b-w')
      .raw({ depth: depth === 16 ? 'ushort' : 'uchar' })
      .toBuffer({ resolveWithObject: true });
    channels = folded.info.channels as ChannelCount;
    samples = samplesFromBuffer(folded.data, depth);
  }
  return { width: info.width, height: info.height, channels, depth, data: samples };
}

/**
 * Encoding: pixels to JPEG, PNG, TIFF or WebP, written atomically, with the source's EXIF and ICC
 * profile carried over and an XMP packet embedded.
 *
 * Bit depth: PNG and TIFF keep 16 bits per sample where the pixels have 16. JPEG and WebP hold
 * 8 bits only, so 16-bit pixels are rounded to 8 bits for them (the result says so in `warnings`).
 * Colour: pixels are sRGB. With a source ICC profile of the same kind (RGB for colour output,
 * grey for grey output), the pixels are converted into that profile by libvips/lcms and the
 * profile is embedded, so the output sits in the source's colour space. Otherwise the output is
 * written without a profile, which readers take as sRGB.
 * EXIF: copied byte for byte with Orientation reset to 1 (pixels are upright) and the pixel
 * dimensions updated. TIFF output carries no EXIF block (libvips cannot write one to TIFF).
 */
import { extname } from 'node:path';
import sharp, { type Sharp } from 'sharp';
import { writeFileAtomic } from '../files/index.js';
import { jpegWithExif, pngWithExif, pngWithIcc, webpWithExif } from './containers.js';
import { exifForUprightOutput } from './exif.js';
import { iccColourSpace, iccFitsChannels, srgbProfile, withProfileFile } from './icc.js';
import { sharpLimit } from './limits.js';
import { checkPixels, colourChannels, hasAlpha, type BitDepth, type Pixels } from './pixels.js';

export type OutputFormat = 'jpeg' | 'png' | 'tiff' | 'webp';

export interface EncodeOptions {
  format: OutputFormat;
  /**
   * JPEG and WebP quality 1-100; default 92 for JPEG and 90 for WebP (common practice for archival
   * derivatives). WebP at 100 is written lossless.
   */
  quality?: number;
  /** The source's raw EXIF block (as `decodeImage` returns it). */
  exif?: Buffer;
  /** The source's ICC profile: the output is converted into it and embeds it. */
  icc?: Buffer;
  /** An XMP packet to embed (see `provenanceXmp`). */
  xmp?: string;
  /** Pixel limit for sharp; default from KINHUE_MAX_PIXELS or 300 MP (see limits.ts). */
  maxPixels?: number;
}

export interface EncodeResult {
  path?: string;
  format: OutputFormat;
  /** Bits per sample written. */
  depth: BitDepth;
  iccEmbedded: boolean;
  exifEmbedded: boolean;
  /** What was not carried over or was reduced, in words. */
  warnings: string[];
}

const EXTENSIONS: Record<OutputFormat, readonly string[]> = {
  jpeg: ['.jpg', '.jpeg', '.jpe'],
  png: ['.png'],
  tiff: ['.tif', '.tiff'],
  webp: ['.webp'],
};

/**
 * The output format a file name asks for, from its extension (case-insensitive), or undefined.
 *
 * @example
 * formatForPath('out/Photo.TIF'); // 'tiff'
 */
export function formatForPath(path: string): OutputFormat | undefined {
  const ext = extname(path).toLowerCase();
  return (Object.keys(EXTENSIONS) as OutputFormat[]).find((f) => EXTENSIONS[f].includes(ext));
}

/**
 * The usual extension for a format, with its dot.
 *
 * @example
 * extensionFor('jpeg'); // '.jpg'
 */
export function extensionFor(format: OutputFormat): string {
  return EXTENSIONS[format][0]!;
}

/** True when the format can hold 16 bits per sample. */
export function supports16Bit(format: OutputFormat): boolean {
  return format === 'png' || format === 'tiff';
}

/**
 * Encodes pixels and writes them atomically to `path`. Throws KH_WRITE_FAILED when writing fails.
 *
 * @example
 * const img = await decodeImage('scans/a.tif');
 * await encodeImage(img.pixels, 'out/a.tif', { format: 'tiff', exif: img.exif, icc: img.icc, xmp });
 */
export async function encodeImage(pixels: Pixels, path: string, options: EncodeOptions): Promise<EncodeResult> {
  const { data, result } = await encodeBuffer(pixels, options);
  await writeFileAtomic(path, data);
  return { ...result, path };
}

/**
 * Encodes pixels to an in-memory file.
 *
 * @example
 * const { data } = await encodeBuffer(pixels, { format: 'png' });
 */
export async function encodeBuffer(pixels: Pixels, options: EncodeOptions): Promise<{ data: Buffer; result: EncodeResult }> {
  checkPixels(pixels);
  const { format } = options;
  const warnings: string[] = [];
  const depth: BitDepth = pixels.depth === 16 && supports16Bit(format) ? 16 : 8;
  if (pixels.depth === 16 && depth === 8)
    warnings.push(`${format.toUpperCase()} holds 8 bits per sample; 16-bit pixels were rounded to 8 bits`);
  const px = depth === pixels.depth ? pixels : to8Bit(pixels);
  const colour = colourChannels(px);

  let profile: Buffer | undefined;
  if (options.icc) {
    if (iccFitsChannels(options.icc, colour)) profile = options.icc;
    else
      warnings.push(
        `the source's ${iccColourSpace(options.icc) ?? 'unreadable'} ICC profile does not fit ${colour === 1 ? 'grey' : 'colour'} output; written as sRGB without a profile`,
      );
  }

  const encode = async (profileFile?: string): Promise<Buffer> => {
    let pipeline = await pipelineFor(px, profileFile !== undefined && colour === 3 && depth === 16, options.maxPixels);
    if (format === 'jpeg' && hasAlpha(px)) {
      pipeline = pipeline.removeAlpha();
      warnings.push('JPEG has no alpha channel; transparency was dropped');
    }
    // A grey profile is reached from sRGB, so grey pixels go through RGB on their way into it.
    const space = colour === 1 && !profileFile ? (depth === 16 ? 'grey16' : 'b-w') : depth === 16 ? 'rgb16' : 'srgb';
    pipeline = pipeline.toColourspace(space);
    if (profileFile) pipeline = pipeline.withIccProfile(profileFile);
    if (options.xmp) pipeline = pipeline.withXmp(options.xmp);
    return formatStep(pipeline, format, options.quality).toBuffer();
  };
  let data = profile ? await withProfileFile(profile, encode) : await encode();

  let exifEmbedded = false;
  if (options.exif) {
    const tiff = exifForUprightOutput(options.exif, px.width, px.height);
    if (!tiff) warnings.push('the source EXIF block could not be read; not carried over');
    else if (format === 'tiff') warnings.push('TIFF output carries no EXIF block (libvips cannot write one); EXIF not carried over');
    else {
      const withExif =
        format === 'jpeg'
          ? jpegWithExif(data, tiff)
          : format === 'png'
            ? pngWithExif(data, tiff)
            : webpWithExif(data, tiff, { width: px.width, height: px.height, alpha: hasAlpha(px) });
      if (withExif) {
        data = withExif;
        exifEmbedded = true;
      } else warnings.push('the source EXIF block is over 64 KB, too large for JPEG; not carried over');
    }
  }
  return { data, result: { format, depth, iccEmbedded: profile !== undefined, exifEmbedded, warnings } };
}

/**
 * The sharp input for the pixels. For 16-bit RGB pixels bound for a profile, the input is a
 * 16-bit PNG tagged sRGB: sharp treats untagged 16-bit RGB as Display P3 when converting into an
 * output profile, while a tagged input is converted from its own profile correctly.
 */
async function pipelineFor(px: Pixels, tagSrgb: boolean, maxPixels?: number): Promise<Sharp> {
  const raw = { width: px.width, height: px.height, channels: px.channels };
  const limit = sharpLimit(maxPixels);
  if (!tagSrgb) return sharp(px.data, { raw, ...limit });
  const png = await sharp(px.data, { raw, ...limit })
    .toColourspace('rgb16')
    .png({ compressionLevel: 0 })
    .toBuffer();
  return sharp(pngWithIcc(png, await srgbProfile(), 'sRGB'), limit);
}

function formatStep(pipeline: Sharp, format: OutputFormat, quality?: number): Sharp {
  switch (format) {
    case 'jpeg':
      // 4:4:4 keeps the colour at full resolution, which is the point of the output.
      return pipeline.jpeg({ quality: quality ?? 92, chromaSubsampling: '4:4:4' });
    case 'png':
      return pipeline.png({ compressionLevel: 6 });
    case 'tiff':
      // sharp's TIFF default is JPEG compression (8-bit, lossy); deflate is lossless and keeps 16 bits.
      return pipeline.tiff({ compression: 'deflate', predictor: 'horizontal' });
    case 'webp':
      // Lossy WebP always halves the colour resolution (4:2:0); quality 100 asks for lossless instead.
      return (quality ?? 90) >= 100 ? pipeline.webp({ lossless: true }) : pipeline.webp({ quality: quality ?? 90 });
  }
}

/** 16-bit to 8-bit by rounding v * 255 / 65535. */
function to8Bit(px: Pixels): Pixels {
  const src = px.data;
  const out = new Uint8Array(src.length);
  for (let i = 0; i < src.length; i++) out[i] = Math.round((src[i]! * 255) / 65535);
  return { ...px, depth: 8, data: out };
}

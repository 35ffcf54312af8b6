/**
 * Byte-level additions to encoded files that libvips cannot make from raw pixels: an EXIF block
 * copied from the source (JPEG APP1, PNG eXIf, WebP EXIF chunk) and an ICC profile in a PNG
 * (iCCP). Each follows the container's published layout: JPEG (ITU-T T.81 markers, EXIF APP1 per
 * CIPA DC-008), PNG (W3C PNG 3rd edition, chunks eXIf and iCCP), WebP (RFC 9649, extended format).
 */
import { crc32, deflateSync } from 'node:zlib';
import { withExifPrefix } from './exif.js';

/** The largest JPEG segment payload: the 16-bit length counts itself. */
const JPEG_SEGMENT_MAX = 0xffff - 2;

/**
 * Inserts an APP1 Exif segment after SOI (and after a JFIF APP0, as most writers do).
 * Returns undefined when the block is too large for one segment.
 */
export function jpegWithExif(jpeg: Buffer, tiff: Buffer): Buffer | undefined {
  if (jpeg[0] !== 0xff || jpeg[1] !== 0xd8) throw new Error('not a JPEG stream');
  const payload = withExifPrefix(tiff);
  if (payload.length > JPEG_SEGMENT_MAX) return undefined;
  let at = 2;
  if (jpeg[at] === 0xff && jpeg[at + 1] === 0xe0) at += 2 + jpeg.readUInt16BE(at + 2);
  const head = Buffer.alloc(4);
  head.writeUInt16BE(0xffe1, 0);
  head.writeUInt16BE(payload.length + 2, 2);
  return Buffer.concat([jpeg.subarray(0, at), head, payload, jpeg.subarray(at)]);
}

function pngChunk(type: string, data: Buffer): Buffer {
  const head = Buffer.alloc(8);
  head.writeUInt32BE(data.length, 0);
  head.write(type, 4, 'latin1');
  const crc = Buffer.alloc(4);
  crc.writeUInt32BE(crc32(data, crc32(head.subarray(4, 8))) >>> 0, 0);
  return Buffer.concat([head, data, crc]);
}

interface PngChunkInfo {
  type: string;
  start: number;
  end: number;
}

function pngChunks(png: Buffer): PngChunkInfo[] {
  const signature = Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
  if (!png.subarray(0, 8).equals(signature)) throw new Error('not a PNG stream');
  const out: PngChunkInfo[] = [];
  let at = 8;
  while (at + 12 <= png.length) {
    const length = png.readUInt32BE(at);
    const type = png.subarray(at + 4, at + 8).toString('latin1');
    out.push({ type, start: at, end: at + 12 + length });
    at += 12 + length;
    if (type === 'IEND') break;
  }
  return out;
}

/** Inserts (or replaces) the eXIf chunk, placed before the first IDAT. */
export function pngWithExif(png: Buffer, tiff: Buffer): Buffer {
  const chunks = pngChunks(png).filter((c) => c.type !== 'eXIf');
  const parts: Buffer[] = [png.subarray(0, 8)];
  let placed = false;
  for (const c of chunks) {
    if (c.type === 'IDAT' && !placed) {
      parts.push(pngChunk('eXIf', tiff));
      placed = true;
    }
    parts.push(png.subarray(c.start, c.end));
  }
  return Buffer.concat(parts);
}

/** Attaches an ICC profile (iCCP right after IHDR), dropping any sRGB, gAMA, cHRM or iCCP chunk. */
export function pngWithIcc(png: Buffer, icc: Buffer, name = 'ICC profile'): Buffer {
  const dropped = new Set(['iCCP', 'sRGB', 'gAMA', 'cHRM']);
  const chunks = pngChunks(png).filter((c) => !dropped.has(c.type));
  const data = Buffer.concat([Buffer.from(name.slice(0, 79), 'latin1'), Buffer.from([0, 0]), deflateSync(icc)]);
  const parts: Buffer[] = [png.subarray(0, 8)];
  for (const c of chunks) {
    parts.push(png.subarray(c.start, c.end));
    if (c.type === 'IHDR') parts.push(pngChunk('iCCP', data));
  }
  return Buffer.concat(parts);
}

function riffChunk(fourcc: string, data: Buffer): Buffer {
  const head = Buffer.alloc(8);
  head.write(fourcc, 0, 'latin1');
  head.writeUInt32LE(data.length, 4);
  return Buffer.concat(data.length % 2 ? [head, data, Buffer.alloc(1)] : [head, data]);
}

/**
 * Adds an EXIF chunk to a WebP file, switching a simple-format file to the extended format (VP8X)
 * when needed. The chunk goes before any XMP chunk, the order RFC 9649 gives.
 */
export function webpWithExif(webp: Buffer, tiff: Buffer, canvas: { width: number; height: number; alpha: boolean }): Buffer {
  if (webp.subarray(0, 4).toString('latin1') !== 'RIFF' || webp.subarray(8, 12).toString('latin1') !== 'WEBP') {
    throw new Error('not a WebP stream');
  }
  const chunks: { fourcc: string; bytes: Buffer }[] = [];
  for (let at = 12; at + 8 <= webp.length; ) {
    const fourcc = webp.subarray(at, at + 4).toString('latin1');
    const size = webp.readUInt32LE(at + 4);
    const end = Math.min(webp.length, at + 8 + size + (size % 2));
    if (fourcc !== 'EXIF') chunks.push({ fourcc, bytes: Buffer.from(webp.subarray(at, end)) });
    at = end;
  }
  let vp8x = chunks.find((c) => c.fourcc === 'VP8X');
  if (!vp8x) {
    const data = Buffer.alloc(10);
    data.writeUIntLE(canvas.width - 1, 4, 3);
    data.writeUIntLE(canvas.height - 1, 7, 3);
    vp8x = { fourcc: 'VP8X', bytes: riffChunk('VP8X', data) };
    chunks.unshift(vp8x);
  }
  // VP8X flags byte: bit 3 EXIF, bit 4 alpha (RFC 9649 section 2.7).
  vp8x.bytes[8] |= 0x08;
  if (canvas.alpha) vp8x.bytes[8] |= 0x10;
  const exifChunk = { fourcc: 'EXIF', bytes: riffChunk('EXIF', tiff) };
  const xmpAt = chunks.findIndex((c) => c.fourcc === 'XMP ');
  if (xmpAt >= 0) chunks.splice(xmpAt, 0, exifChunk);
  else chunks.push(exifChunk);
  const body = Buffer.concat(chunks.map((c) => c.bytes));
  const head = Buffer.alloc(12);
  head.write('RIFF', 0, 'latin1');
  head.writeUInt32LE(body.length + 4, 4);
  head.write('WEBP', 8, 'latin1');
  return Buffer.concat([head, body]);
}

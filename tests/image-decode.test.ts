// Decoding: bit depth, EXIF orientation, ICC conversion, multi-page TIFF and the input errors.
// Fixtures are made in the test with sharp (libvips) in a temporary folder.
import { createHash } from 'node:crypto';
import { mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { crc32, deflateSync } from 'node:zlib';
import { converter } from 'culori';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ciede2000, greyToLightness, lightnessToGrey, srgbToLab } from '../src/colour/index.js';
import { ErrorCodes, InputError, UsageError, type KinhueError } from '../src/errors.js';
import { decodeBuffer, decodeImage, encodeImage, resolveMaxPixels, DEFAULT_MAX_PIXELS } from '../src/image/index.js';

const toRgb = converter('rgb');

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'kinhue-decode-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function failure(promise: Promise<unknown>): Promise<KinhueError> {
  try {
    await promise;
  } catch (error) {
    return error as KinhueError;
  }
  throw new Error('expected a failure');
}

/** The checks every input error must pass: fixed code, file named, a next step, no stack trace. */
function expectInputError(error: KinhueError, code: string, file: string): void {
  expect(error).toBeInstanceOf(InputError);
  expect(error.code).toBe(code);
  expect(error.file).toBe(file);
  const text = error.describe();
  expect(text).toContain(file);
  expect(text).toMatch(/next step: \S/);
  expect(text).not.toMatch(/\n\s+at /); // no stack frames
  expect(error.message).not.toMatch(/\n/);
}

describe('bit depth', () => {
  it('a 16-bit greyscale TIFF keeps its 16-bit L* through decode and encode (within one 16-bit step)', async () => {
    // A ramp over the whole 16-bit range: 256 x 64 = 16384 distinct levels, 4 apart.
    const width = 256,
      height = 64;
    const source = new Uint16Array(width * height);
    for (let i = 0; i < source.length; i++) source[i] = Math.min(65535, i * 4 + (i % 3));
    const file = join(dir, 'ramp16.tif');
    await sharp(source, { raw: { width, height, channels: 1 } })
      .toColourspace('grey16')
      .tiff({ compression: 'deflate' })
      .toFile(file);
    expect((await sharp(file).metadata()).depth).toBe('ushort'); // libvips wrote 16 bits

    const decoded = await decodeImage(file);
    expect(decoded.format).toBe('tiff');
    expect(decoded.bitDepth).toBe(16);
    expect(decoded.pixels).toMatchObject({ width, height, channels: 1, depth: 16 });
    expect(decoded.pixels.data).toBeInstanceOf(Uint16Array);
    expect(Array.from(decoded.pixels.data)).toEqual(Array.from(source)); // decode is exact

    // Through L* and back (the path restore takes), then written as 16-bit TIFF and PNG.
    const L = greyToLightness(decoded.pixels.data, 1);
    const grey = lightnessToGrey(L, new Uint16Array(L.length));
    for (const ext of ['tif', 'png'] as const) {
      const out = join(dir, `ramp16-out.${ext}`);
      await encodeImage({ ...decoded.pixels, data: grey }, out, { format: ext === 'tif' ? 'tiff' : 'png' });
      const again = await decodeImage(out);
      expect(again.pixels.depth).toBe(16);
      expect(again.pixels.channels).toBe(1);
      let worst = 0;
      for (let i = 0; i < source.length; i++) worst = Math.max(worst, Math.abs(again.pixels.data[i]! - source[i]!));
      expect(worst).toBeLessThanOrEqual(1); // the tolerance: one 16-bit step
    }
  });

  it('an 8-bit JPEG decodes to 8-bit sRGB', async () => {
    const file = join(dir, 'plain.jpg');
    await sharp({ create: { width: 8, height: 4, channels: 3, background: '#336699' } })
      .jpeg({ quality: 100 })
      .toFile(file);
    const decoded = await decodeImage(file);
    expect(decoded.pixels).toMatchObject({ width: 8, height: 4, channels: 3, depth: 8 });
    // JPEG at quality 100 on a flat field: within 2 levels of #336699 (common practice tolerance).
    const [r, g, b] = decoded.pixels.data;
    expect(Math.abs(r! - 0x33)).toBeLessThanOrEqual(2);
    expect(Math.abs(g! - 0x66)).toBeLessThanOrEqual(2);
    expect(Math.abs(b! - 0x99)).toBeLessThanOrEqual(2);
  });
});

/**
 * Where pixel (row, col) of the upright image is stored for each EXIF Orientation value, following
 * the tag's definition in CIPA DC-008 (Exif 2.32) section 4.6.4 / TIFF 6.0: which visual side the
 * stored 0th row and 0th column are on. Written from that table, independently of libvips.
 */
function storedFor(upright: Uint8Array, w: number, h: number, orientation: number): { data: Uint8Array; width: number; height: number } {
  const swap = orientation >= 5;
  const width = swap ? h : w,
    height = swap ? w : h;
  const data = new Uint8Array(width * height * 3);
  for (let r = 0; r < height; r++) {
    for (let c = 0; c < width; c++) {
      let ur: number, uc: number;
      switch (orientation) {
        case 1:
          ur = r;
          uc = c;
          break; // 0th row top, 0th column left
        case 2:
          ur = r;
          uc = w - 1 - c;
          break; // row top, column right
        case 3:
          ur = h - 1 - r;
          uc = w - 1 - c;
          break; // row bottom, column right
        case 4:
          ur = h - 1 - r;
          uc = c;
          break; // row bottom, column left
        case 5:
          ur = c;
          uc = r;
          break; // row left, column top
        case 6:
          ur = c;
          uc = w - 1 - r;
          break; // row right, column top
        case 7:
          ur = h - 1 - c;
          uc = w - 1 - r;
          break; // row right, column bottom
        default:
          ur = h - 1 - c;
          uc = r;
          break; // 8: row left, column bottom
      }
      for (let k = 0; k < 3; k++) data[(r * width + c) * 3 + k] = upright[(ur * w + uc) * 3 + k]!;
    }
  }
  return { data, width, height };
}

describe('EXIF orientation', () => {
  it('all eight orientations come out upright', async () => {
    // Asymmetric 5 x 3 image in which every pixel is different.
    const w = 5,
      h = 3;
    const upright = new Uint8Array(w * h * 3);
    for (let i = 0; i < w * h; i++) upright.set([i * 16, Math.floor(i / w) * 100, (i % w) * 50], i * 3);
    for (let orientation = 1; orientation <= 8; orientation++) {
      const stored = storedFor(upright, w, h, orientation);
      const file = join(dir, `orient-${orientation}.png`);
      await sharp(stored.data, { raw: { width: stored.width, height: stored.height, channels: 3 } })
        .withMetadata({ orientation })
        .png()
        .toFile(file);
      expect((await sharp(file).metadata()).orientation).toBe(orientation);
      const decoded = await decodeImage(file);
      expect(decoded.orientation).toBe(orientation);
      expect([decoded.pixels.width, decoded.pixels.height]).toEqual([w, h]);
      expect(Array.from(decoded.pixels.data), `orientation ${orientation}`).toEqual(Array.from(upright));
    }
  });
});

/** The largest CIEDE2000 (Sharma et al. 2005) difference between two RGB images, 8 or 16 bit. */
function worstDeltaE(expected: Uint8Array | Uint16Array, actual: Uint8Array | Uint16Array): number {
  const e = srgbToLab(expected, 3),
    a = srgbToLab(actual, 3);
  let worst = 0;
  for (let i = 0; i < e.L.length; i++) {
    worst = Math.max(worst, ciede2000(e.L[i]!, e.a[i]!, e.b[i]!, a.L[i]!, a.a[i]!, a.b[i]!));
  }
  return worst;
}

/**
 * The sRGB values (0-1, clipped) of stored Display P3 values, computed by culori, an independent
 * colour library, from the published Display P3 definition (P3 primaries, D65, sRGB curve).
 */
function p3ToSrgbReference(stored: ArrayLike<number>, max: number): Float64Array {
  const out = new Float64Array(stored.length);
  for (let i = 0; i < stored.length; i += 3) {
    const c = toRgb({ mode: 'p3', r: stored[i]! / max, g: stored[i + 1]! / max, b: stored[i + 2]! / max });
    out[i] = Math.min(1, Math.max(0, c.r));
    out[i + 1] = Math.min(1, Math.max(0, c.g));
    out[i + 2] = Math.min(1, Math.max(0, c.b));
  }
  return out;
}

function worstCodeDifference(actual: ArrayLike<number>, reference: Float64Array, max: number): number {
  let worst = 0;
  for (let i = 0; i < reference.length; i++) worst = Math.max(worst, Math.abs(actual[i]! - reference[i]! * max));
  return worst;
}

function to16(values: Float64Array): Uint16Array {
  return Uint16Array.from(values, (v) => Math.round(v * 65535));
}

describe('ICC profiles', () => {
  // 4096 colours spread over the sRGB cube (16 levels per channel).
  const size = 64;
  const srgb = new Uint8Array(size * size * 3);
  for (let i = 0; i < size * size; i++) srgb.set([(i & 15) * 17, ((i >> 4) & 15) * 17, ((i >> 8) & 15) * 17], i * 3);
  const raw = { width: size, height: size, channels: 3 as const };

  it('an 8-bit image tagged Display P3 decodes to the right sRGB values', async () => {
    // libvips/lcms converts the sRGB values into Display P3 and tags the file with its P3 profile.
    const file = join(dir, 'p3-8.png');
    await sharp(srgb, { raw }).withIccProfile('p3').png().toFile(file);
    expect((await sharp(file).metadata()).hasProfile).toBe(true);
    const stored = await sharp(file, { ignoreIcc: true }).raw().toBuffer();
    expect(
      worstCodeDifference(
        stored,
        Float64Array.from(srgb, (v) => v / 255),
        255,
      ),
    ).toBeGreaterThan(20); // really P3 values

    const decoded = await decodeImage(file);
    expect(decoded.hasIcc).toBe(true);
    expect(decoded.icc?.subarray(16, 20).toString('latin1')).toBe('RGB ');
    expect(decoded.pixels).toMatchObject({ channels: 3, depth: 8 });
    // Against culori's conversion of the stored values. lcms' 8-bit transform misses by up to 4
    // codes where a channel is near 0 (measured 3.9), where a code step is hard to see; in
    // CIEDE2000 the worst is 0.74 (measured), so the bound is 1, about one just-noticeable difference.
    const reference = p3ToSrgbReference(stored, 255);
    expect(
      worstDeltaE(
        to16(reference),
        Uint16Array.from(decoded.pixels.data, (v) => v * 257),
      ),
    ).toBeLessThan(1);
    // Back near the original sRGB colours too: P3 stored in 8 bits rounds each channel, which one
    // code step of sRGB can show as up to ~1.7 CIEDE2000 in dark blue-greys (measured 1.68); bound 2.
    expect(worstDeltaE(srgb, decoded.pixels.data)).toBeLessThan(2);
  });

  it('a 16-bit image tagged Display P3 decodes to the right sRGB values', async () => {
    // libvips converts the 8-bit sRGB values to 16-bit Display P3 (sRGB working space for 8-bit input).
    const file = join(dir, 'p3-16.png');
    await sharp(srgb, { raw }).toColourspace('rgb16').withIccProfile('p3').png().toFile(file);
    const meta = await sharp(file).metadata();
    expect(meta.depth).toBe('ushort');
    expect(meta.hasProfile).toBe(true);
    const storedBuf = await sharp(file, { ignoreIcc: true }).toColourspace('rgb16').raw({ depth: 'ushort' }).toBuffer();
    const stored = new Uint16Array(storedBuf.buffer, storedBuf.byteOffset, storedBuf.length / 2);
    expect(worstDeltaE(srgb, stored)).toBeGreaterThan(3); // read as sRGB, the stored values are off

    const decoded = await decodeImage(file);
    expect(decoded.pixels).toMatchObject({ channels: 3, depth: 16 });
    // lcms resamples 16-bit transforms into a grid, which misses close to an output channel of
    // 0 (measured: 5% of full scale on blue for P3 yellow); in CIEDE2000 against culori's
    // conversion the worst is 0.92 and against the original colours 0.97 (measured), so the bound
    // is 1.2: about one just-noticeable difference (common practice).
    const reference = p3ToSrgbReference(stored, 65535);
    expect(worstDeltaE(to16(reference), decoded.pixels.data)).toBeLessThan(1.2);
    expect(worstDeltaE(srgb, decoded.pixels.data)).toBeLessThan(1.2);
  });
});

describe('multi-page TIFF', () => {
  it('uses page 1 and says so', async () => {
    const red = await sharp({ create: { width: 6, height: 4, channels: 3, background: '#ff0000' } })
      .png()
      .toBuffer();
    const blue = await sharp({ create: { width: 6, height: 4, channels: 3, background: '#0000ff' } })
      .png()
      .toBuffer();
    const file = join(dir, 'two-pages.tif');
    await sharp([red, blue], { join: { animated: true } })
      .tiff({ compression: 'deflate' })
      .toFile(file);
    expect((await sharp(file).metadata()).pages).toBe(2);
    const decoded = await decodeImage(file);
    expect(decoded.pageCount).toBe(2);
    expect(decoded.pixels).toMatchObject({ width: 6, height: 4, channels: 3 });
    expect(Array.from(decoded.pixels.data.subarray(0, 3))).toEqual([255, 0, 0]);
    expect(decoded.warnings.join('\n')).toMatch(/2 pages; only page 1 is used/);
  });
});

/** A PNG whose header claims width x height but whose data is one tiny deflated row. */
function pngClaiming(width: number, height: number): Buffer {
  const chunk = (type: string, data: Buffer): Buffer => {
    const head = Buffer.alloc(8);
    head.writeUInt32BE(data.length, 0);
    head.write(type, 4, 'latin1');
    const crc = Buffer.alloc(4);
    crc.writeUInt32BE(crc32(data, crc32(Buffer.from(type, 'latin1'))) >>> 0, 0);
    return Buffer.concat([head, data, crc]);
  };
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(width, 0);
  ihdr.writeUInt32BE(height, 4);
  ihdr.set([8, 0, 0, 0, 0], 8); // 8-bit greyscale (PNG spec, IHDR)
  return Buffer.concat([
    Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]),
    chunk('IHDR', ihdr),
    chunk('IDAT', deflateSync(Buffer.alloc(1 + width))),
    chunk('IEND', Buffer.alloc(0)),
  ]);
}

describe('input errors', () => {
  it('a zero-byte file gives KH_EMPTY_FILE', async () => {
    const file = join(dir, 'empty.jpg');
    await writeFile(file, '');
    expectInputError(await failure(decodeImage(file)), ErrorCodes.EMPTY_FILE, file);
    expectInputError(await failure(decodeBuffer(Buffer.alloc(0), 'in-memory.png')), ErrorCodes.EMPTY_FILE, 'in-memory.png');
  });

  it('a truncated JPEG gives KH_CORRUPT_IMAGE', async () => {
    const full = await sharp({
      create: { width: 64, height: 64, channels: 3, background: '#808080', noise: { type: 'gaussian', mean: 128, sigma: 40 } },
    })
      .jpeg()
      .toBuffer();
    const file = join(dir, 'truncated.jpg');
    await writeFile(file, full.subarray(0, Math.floor(full.length / 2)));
    // libvips itself reads the header fine and, when told to tolerate errors, fills in the rest.
    expect((await sharp(file).metadata()).width).toBe(64);
    expect((await sharp(file, { failOn: 'none' }).raw().toBuffer()).length).toBe(64 * 64 * 3);
    const error = await failure(decodeImage(file));
    expectInputError(error, ErrorCodes.CORRUPT_IMAGE, file);
    expect(error.message).toMatch(/damaged or ends early/);
  });

  it('a text file named .jpg gives KH_NOT_AN_IMAGE', async () => {
    const file = join(dir, 'notes.jpg');
    await writeFile(file, 'These are notes about the photographs, not a photograph.\n');
    expectInputError(await failure(decodeImage(file)), ErrorCodes.NOT_AN_IMAGE, file);
  });

  it('a missing file or a folder gives KH_UNREADABLE', async () => {
    const file = join(dir, 'no-such-scan.tif');
    expectInputError(await failure(decodeImage(file)), ErrorCodes.UNREADABLE, file);
    expectInputError(await failure(decodeImage(dir)), ErrorCodes.UNREADABLE, dir);
  });

  it('an over-limit image gives KH_TOO_LARGE from its header, before decoding', async () => {
    // A 40-byte-data PNG claiming 100000 x 100000 (10 gigapixels): a decompression bomb's header.
    const file = join(dir, 'bomb.png');
    await writeFile(file, pngClaiming(100_000, 100_000));
    const error = await failure(decodeImage(file));
    expectInputError(error, ErrorCodes.TOO_LARGE, file);
    expect(error.message).toContain('100000 x 100000');
    expect(error.hint).toContain('KINHUE_MAX_PIXELS');
  });

  it('the pixel limit is raised by the option or KINHUE_MAX_PIXELS', async () => {
    expect(DEFAULT_MAX_PIXELS).toBeGreaterThanOrEqual(100e6); // a 100-megapixel scan must pass
    expect(resolveMaxPixels(undefined, {})).toBe(DEFAULT_MAX_PIXELS);
    expect(resolveMaxPixels(undefined, { KINHUE_MAX_PIXELS: '600e6' })).toBe(600e6);
    expect(resolveMaxPixels(undefined, { KINHUE_MAX_PIXELS: ' ' })).toBe(DEFAULT_MAX_PIXELS);
    // Not a whole number of pixels a file could have: refused, never silently replaced by another limit.
    for (const bad of ['lots', '1e99', '-5', '0', '1.5', 'abc', '9007199254740993']) {
      expect(() => resolveMaxPixels(undefined, { KINHUE_MAX_PIXELS: bad }), bad).toThrow(UsageError);
    }
    expect(resolveMaxPixels(5000, { KINHUE_MAX_PIXELS: '600e6' })).toBe(5000);

    const file = join(dir, 'big.png');
    await sharp({ create: { width: 100, height: 80, channels: 3, background: '#102030' } })
      .png()
      .toFile(file);
    expectInputError(await failure(decodeImage(file, { maxPixels: 7999 })), ErrorCodes.TOO_LARGE, file);
    expect((await decodeImage(file, { maxPixels: 8000 })).pixels.width).toBe(100);
    const saved = process.env.KINHUE_MAX_PIXELS;
    try {
      process.env.KINHUE_MAX_PIXELS = '5000';
      expectInputError(await failure(decodeImage(file)), ErrorCodes.TOO_LARGE, file);
      process.env.KINHUE_MAX_PIXELS = '8000';
      expect((await decodeImage(file)).pixels.height).toBe(80);
    } finally {
      if (saved === undefined) delete process.env.KINHUE_MAX_PIXELS;
      else process.env.KINHUE_MAX_PIXELS = saved;
    }
  });

  it('decoding leaves the input file unchanged', async () => {
    const file = join(dir, 'orient-6.png');
    const before = createHash('sha256')
      .update(await readFile(file))
      .digest('hex');
    await decodeImage(file);
    expect(
      createHash('sha256')
        .update(await readFile(file))
        .digest('hex'),
    ).toBe(before);
  });
});

// Encoding: bit depth, EXIF and ICC carried over, XMP provenance, atomic writes, and grey ICC
// profiles through decode and encode. Fixtures are made in the test with sharp (libvips).
import { mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { greyToLightness, lightnessFromY, srgbToLab, ciede2000 } from '../src/colour/index.js';
import { ErrorCodes, KinhueError } from '../src/errors.js';
import { pngWithIcc } from '../src/image/containers.js';
import { writeAtomic, writeFileAtomic } from '../src/files/index.js';
import {
  decodeBuffer,
  decodeImage,
  encodeBuffer,
  encodeImage,
  exifOrientation,
  extensionFor,
  formatForPath,
  provenanceXmp,
  writeGreyMap,
  type OutputFormat,
  type Pixels,
} from '../src/image/index.js';
import { VERSION } from '../src/version.js';
import { greyGammaProfile } from './image-icc-profile.js';

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'kinhue-encode-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

const FORMATS: OutputFormat[] = ['jpeg', 'png', 'tiff', 'webp'];

function gradient(width: number, height: number): Pixels {
  const data = new Uint8Array(width * height * 3);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) data.set([(x * 255) / (width - 1), (y * 255) / (height - 1), 96], (y * width + x) * 3);
  }
  return { width, height, channels: 3, depth: 8, data };
}

function worstDeltaE(expected: Uint8Array | Uint16Array, actual: Uint8Array | Uint16Array): number {
  const e = srgbToLab(expected, 3),
    a = srgbToLab(actual, 3);
  let worst = 0;
  for (let i = 0; i < e.L.length; i++) worst = Math.max(worst, ciede2000(e.L[i]!, e.a[i]!, e.b[i]!, a.L[i]!, a.a[i]!, a.b[i]!));
  return worst;
}

describe('formats', () => {
  it('maps file names to formats and back', () => {
    expect(formatForPath('a/B.JPG')).toBe('jpeg');
    expect(formatForPath('scan.tiff')).toBe('tiff');
    expect(formatForPath('scan.tif')).toBe('tiff');
    expect(formatForPath('x.webp')).toBe('webp');
    expect(formatForPath('x.png')).toBe('png');
    expect(formatForPath('notes.txt')).toBeUndefined();
    for (const f of FORMATS) expect(formatForPath(`x${extensionFor(f)}`)).toBe(f);
  });

  it('keeps 16 bits in PNG and TIFF and writes 8 bits to JPEG and WebP, saying so', async () => {
    const data = new Uint16Array(32 * 8 * 3);
    for (let i = 0; i < data.length; i++) data[i] = (i * 977) % 65536;
    const px: Pixels = { width: 32, height: 8, channels: 3, depth: 16, data };
    for (const format of FORMATS) {
      const { data: file, result } = await encodeBuffer(px, { format });
      const meta = await sharp(file).metadata();
      expect(meta.format).toBe(format === 'jpeg' ? 'jpeg' : format);
      const sixteen = format === 'png' || format === 'tiff';
      expect(meta.depth, format).toBe(sixteen ? 'ushort' : 'uchar');
      expect(result.depth).toBe(sixteen ? 16 : 8);
      expect(result.warnings.some((w) => /8 bits/.test(w))).toBe(!sixteen);
      if (sixteen) {
        const back = await decodeBuffer(file, `x.${format}`);
        expect(Array.from(back.pixels.data)).toEqual(Array.from(data)); // lossless, exact
      }
    }
  });
});

describe('EXIF', () => {
  it('is carried over with Orientation reset to 1, so the upright pixels stay upright', async () => {
    // Source: a 40 x 20 stored image tagged Orientation 6 (shown 20 x 40) with two IFD0 text tags.
    const stored = gradient(40, 20);
    const source = join(dir, 'exif-source.jpg');
    await sharp(stored.data, { raw: { width: 40, height: 20, channels: 3 } })
      .withExif({ IFD0: { Copyright: 'Test Archive 1952', Artist: 'kinhue test suite' } })
      .withMetadata({ orientation: 6 })
      .jpeg({ quality: 95 })
      .toFile(source);
    const sourceMeta = await sharp(source).metadata();
    expect(sourceMeta.orientation).toBe(6);
    expect(sourceMeta.exif?.toString('latin1')).toContain('Test Archive 1952');

    const decoded = await decodeImage(source);
    expect(decoded.orientation).toBe(6);
    expect([decoded.pixels.width, decoded.pixels.height]).toEqual([20, 40]);
    expect(exifOrientation(decoded.exif!)).toBe(6);

    for (const format of ['jpeg', 'png', 'webp'] as const) {
      const out = join(dir, `exif-out${extensionFor(format)}`);
      const result = await encodeImage(decoded.pixels, out, { format, exif: decoded.exif });
      expect(result.exifEmbedded, format).toBe(true);
      // Read back by libvips/libexif, independently of kinhue's writer.
      const meta = await sharp(out).metadata();
      expect(meta.orientation, format).toBe(1);
      expect(meta.exif?.toString('latin1'), format).toContain('Test Archive 1952');
      expect(meta.exif?.toString('latin1'), format).toContain('kinhue test suite');
      const again = await decodeImage(out);
      expect([again.pixels.width, again.pixels.height], format).toEqual([20, 40]);
    }
    const tiff = await encodeBuffer(decoded.pixels, { format: 'tiff', exif: decoded.exif });
    expect(tiff.result.exifEmbedded).toBe(false);
    expect(tiff.result.warnings.join('\n')).toMatch(/TIFF output carries no EXIF/);
  });
});

describe('ICC profiles', () => {
  it('a Display P3 source gets its profile back, with its colours', async () => {
    // Source: libvips converts a gradient to Display P3 and embeds the profile.
    const original = gradient(48, 32);
    const source = join(dir, 'p3-source.png');
    await sharp(original.data, { raw: { width: 48, height: 32, channels: 3 } })
      .withIccProfile('p3')
      .png()
      .toFile(source);
    const decoded = await decodeImage(source);
    const sourceIcc = (await sharp(source).metadata()).icc!;
    for (const format of FORMATS) {
      const out = join(dir, `p3-out${extensionFor(format)}`);
      const result = await encodeImage(decoded.pixels, out, { format, icc: decoded.icc, quality: 100 });
      expect(result.iccEmbedded).toBe(true);
      const meta = await sharp(out).metadata();
      expect(meta.hasProfile, format).toBe(true);
      expect(meta.icc?.equals(sourceIcc), format).toBe(true); // the same profile bytes
      // Decoded again (P3 to sRGB by libvips), the colours are those kinhue wrote: two 8-bit
      // conversions through P3; lossless formats (WebP at quality 100 is lossless) within 1.5
      // CIEDE2000 (our bound; cf. the decode test), JPEG within 3 at quality 100 (common practice).
      const again = await decodeImage(out);
      const lossless = format !== 'jpeg';
      expect(worstDeltaE(decoded.pixels.data, again.pixels.data), format).toBeLessThan(lossless ? 1.5 : 3);
    }
  });

  it('16-bit colour keeps 16 bits and its Display P3 profile', async () => {
    const original = gradient(48, 32);
    const source = join(dir, 'p3-16-source.png');
    await sharp(original.data, { raw: { width: 48, height: 32, channels: 3 } })
      .toColourspace('rgb16')
      .withIccProfile('p3')
      .png()
      .toFile(source);
    const decoded = await decodeImage(source);
    expect(decoded.pixels.depth).toBe(16);
    const out = join(dir, 'p3-16-out.tif');
    await encodeImage(decoded.pixels, out, { format: 'tiff', icc: decoded.icc });
    const meta = await sharp(out).metadata();
    expect(meta.depth).toBe('ushort');
    expect(meta.hasProfile).toBe(true);
    // The stored values must be P3 again: close to the source file's own stored values.
    const raw16 = async (file: string): Promise<Uint16Array> => {
      const b = await sharp(file, { ignoreIcc: true }).toColourspace('rgb16').raw({ depth: 'ushort' }).toBuffer();
      return new Uint16Array(b.buffer, b.byteOffset, b.length / 2);
    };
    // lcms 16-bit grid error on two conversions (see the decode test): measured 0.49 CIEDE2000
    // with both read as if sRGB, bound 1; reading P3 values as sRGB would be off by more than 3.
    expect(worstDeltaE(await raw16(source), await raw16(out))).toBeLessThan(1);
    expect(worstDeltaE(decoded.pixels.data, await raw16(out))).toBeGreaterThan(3);
    const again = await decodeImage(out);
    expect(worstDeltaE(decoded.pixels.data, again.pixels.data)).toBeLessThan(1); // measured 0.34
  });

  it('a profile that does not fit the output is left out, with a warning', async () => {
    const px = gradient(8, 8);
    const { icc } = greyGammaProfile(2.2);
    const { data, result } = await encodeBuffer(px, { format: 'png', icc });
    expect(result.iccEmbedded).toBe(false);
    expect(result.warnings.join('\n')).toMatch(/GRAY ICC profile does not fit colour output/);
    expect((await sharp(data).metadata()).hasProfile).toBe(false);
  });

  it('grey scans with a grey gamma profile decode to sRGB grey and encode back into the profile', async () => {
    // Expected values from the profile's definition (ICC.1: Y = v^gamma) and CIE L* (CIE 15:2004).
    const { icc, gamma } = greyGammaProfile(1.8);
    for (const depth of [8, 16] as const) {
      const max = depth === 8 ? 255 : 65535;
      const values = depth === 8 ? Uint8Array.from({ length: 256 }, (_, i) => i) : Uint16Array.from({ length: 256 }, (_, i) => i * 257);
      const plain = await sharp(values, { raw: { width: 16, height: 16, channels: 1 } })
        .toColourspace(depth === 8 ? 'b-w' : 'grey16')
        .png()
        .toBuffer();
      const tagged = pngWithIcc(plain, icc, 'grey gamma 1.8');
      const decoded = await decodeBuffer(tagged, `grey-${depth}.png`);
      expect(decoded.pixels).toMatchObject({ channels: 1, depth });
      const L = greyToLightness(decoded.pixels.data, 1);
      let worst = 0;
      for (let i = 0; i < 256; i++) worst = Math.max(worst, Math.abs(L[i]! - lightnessFromY(Math.pow(values[i]! / max, gamma))));
      // lcms' tables: measured 0.40 L* (8-bit) and 0.37 L* (16-bit); the bound 0.5 L* is well under a
      // just-noticeable difference of about 1 L* (common practice).
      expect(worst, `${depth}-bit`).toBeLessThan(0.5);

      const { data, result } = await encodeBuffer(decoded.pixels, { format: 'png', icc: decoded.icc });
      expect(result.iccEmbedded).toBe(true);
      const meta = await sharp(data).metadata();
      expect(meta.channels).toBe(1);
      expect(meta.depth).toBe(depth === 8 ? 'uchar' : 'ushort');
      expect(iccSpace(meta.icc)).toBe('GRAY');
      const stored = await sharp(data, { ignoreIcc: true })
        .toColourspace(depth === 8 ? 'b-w' : 'grey16')
        .raw({ depth: depth === 8 ? 'uchar' : 'ushort' })
        .toBuffer();
      const back = depth === 8 ? stored : new Uint16Array(stored.buffer, stored.byteOffset, stored.length / 2);
      let worstBack = 0;
      for (let i = 0; i < 256; i++) worstBack = Math.max(worstBack, Math.abs(back[i]! - values[i]!) / max);
      // Back in the profile's own values: within one 8-bit code (two lcms passes; measured 1 code at 8 bits, 0.7 at 16).
      expect(worstBack * 255, `${depth}-bit`).toBeLessThanOrEqual(1.01);
    }
  });
});

function iccSpace(icc: Buffer | undefined): string | undefined {
  return icc?.subarray(16, 20).toString('latin1').trim();
}

describe('XMP provenance', () => {
  it('writes dc:description, xmpMM:DerivedFrom and xmp:CreatorTool that libvips reads back', async () => {
    const xmp = provenanceXmp({
      sourceFile: 'scans/1952 wedding & party.tif',
      derivedFromHash: 'ab'.repeat(32),
      createDate: new Date('2026-01-02T03:04:05Z'),
      extra: { model: 'demo-model' },
    });
    expect(xmp.startsWith('<?xpacket begin="\uFEFF" id="W5M0MpCehiHzreSzNTczkc9d"?>')).toBe(true);
    expect(xmp.trimEnd().endsWith('<?xpacket end="w"?>')).toBe(true);
    for (const format of FORMATS) {
      const { data } = await encodeBuffer(gradient(8, 8), { format, xmp });
      const read = (await sharp(data).metadata()).xmpAsString ?? '';
      expect(read, format).toContain('xmlns:dc="http://purl.org/dc/elements/1.1/"');
      expect(read, format).toMatch(/<dc:description>\s*<rdf:Alt>\s*<rdf:li xml:lang="x-default">Colourised interpretation[^<]*estimate/);
      expect(read, format).toContain(`<xmp:CreatorTool>kinhue ${VERSION}</xmp:CreatorTool>`);
      expect(read, format).toMatch(
        /<xmpMM:DerivedFrom rdf:parseType="Resource">\s*<stRef:filePath>scans\/1952 wedding &amp; party\.tif<\/stRef:filePath>/,
      );
      expect(read, format).toContain('<xmp:CreateDate>2026-01-02T03:04:05.000Z</xmp:CreateDate>');
      expect(read, format).toContain(`<kinhue:sourceSha256>${'ab'.repeat(32)}</kinhue:sourceSha256>`);
      expect(read, format).toContain('<kinhue:model>demo-model</kinhue:model>');
    }
  });
});

describe('all metadata together', () => {
  it('EXIF, ICC profile and XMP all survive in one file', async () => {
    const source = await sharp(gradient(24, 16).data, { raw: { width: 24, height: 16, channels: 3 } })
      .withExif({ IFD0: { Copyright: 'Test Archive 1952' } })
      .withMetadata({ orientation: 3 })
      .withIccProfile('p3')
      .jpeg({ quality: 95 })
      .toBuffer();
    const decoded = await decodeBuffer(source, 'all.jpg');
    const xmp = provenanceXmp({ sourceFile: 'all.jpg' });
    for (const format of FORMATS) {
      const { data, result } = await encodeBuffer(decoded.pixels, { format, exif: decoded.exif, icc: decoded.icc, xmp });
      const meta = await sharp(data).metadata();
      expect(meta.hasProfile, format).toBe(true);
      expect(meta.xmpAsString, format).toContain('<stRef:filePath>all.jpg</stRef:filePath>');
      if (format !== 'tiff') {
        expect(result.exifEmbedded, format).toBe(true);
        expect(meta.orientation, format).toBe(1);
        expect(meta.exif?.toString('latin1'), format).toContain('Test Archive 1952');
      }
    }
  });
});

describe('atomic writes', () => {
  it('leaves the file and no temporary file behind', async () => {
    const out = join(dir, 'atomic', 'photo.png');
    await rm(join(dir, 'atomic'), { recursive: true, force: true });
    await import('node:fs/promises').then((fs) => fs.mkdir(join(dir, 'atomic')));
    await encodeImage(gradient(8, 8), out, { format: 'png' });
    await writeFileAtomic(join(dir, 'atomic', 'notes.json'), '{"ok":true}');
    expect((await readdir(join(dir, 'atomic'))).sort()).toEqual(['notes.json', 'photo.png']);
  });

  it('never leaves a half file when the encoder fails, and keeps an existing file', async () => {
    const folder = join(dir, 'failing');
    await import('node:fs/promises').then((fs) => fs.mkdir(folder));
    const target = join(folder, 'result.tif');
    const failing = (temp: string): Promise<void> =>
      writeFile(temp, Buffer.alloc(1000, 7)).then(() => {
        throw new Error('encoder crashed half way');
      });
    const error = (await writeAtomic(target, failing).catch((e: unknown) => e)) as KinhueError;
    expect(error).toBeInstanceOf(KinhueError);
    expect(error.code).toBe(ErrorCodes.WRITE_FAILED);
    expect(error.file).toBe(target);
    expect(await readdir(folder)).toEqual([]); // neither the target nor the temporary file

    await writeFile(target, 'previous result');
    await writeAtomic(target, failing).catch(() => undefined);
    expect(await readdir(folder)).toEqual(['result.tif']);
    expect(await readFile(target, 'utf8')).toBe('previous result');
  });

  it('a missing output folder gives KH_WRITE_FAILED naming the file', async () => {
    const out = join(dir, 'no-such-folder', 'a.png');
    const error = (await encodeImage(gradient(4, 4), out, { format: 'png' }).catch((e: unknown) => e)) as KinhueError;
    expect(error.code).toBe(ErrorCodes.WRITE_FAILED);
    expect(error.describe()).toContain(out);
    expect(error.describe()).toMatch(/next step: \S/);
  });
});

describe('pixel limit', () => {
  it("encodes a scan above libvips' own 268-megapixel default and within kinhue's 300", async () => {
    // libvips' default limit is 0x3FFF squared = 268,402,689 pixels (sharp's documented
    // limitInputPixels default); 16400 x 16400 = 268,960,000 is just above it.
    const side = 16_400;
    const pixels: Pixels = { width: side, height: side, channels: 1, depth: 8, data: new Uint8Array(side * side).fill(118) };
    const { data } = await encodeBuffer(pixels, { format: 'png' });
    const meta = await sharp(data, { limitInputPixels: false }).metadata();
    expect([meta.width, meta.height]).toEqual([side, side]);
  });

  it('takes its limit from KINHUE_MAX_PIXELS, as decoding does', async () => {
    const saved = process.env.KINHUE_MAX_PIXELS;
    process.env.KINHUE_MAX_PIXELS = '1000';
    try {
      await expect(encodeBuffer(gradient(40, 40), { format: 'png' })).rejects.toThrow(/pixel limit/);
      await expect(writeGreyMap(new Uint8Array(40 * 40), 40, 40, 80, 80, join(dir, 'limited.png'))).rejects.toThrow(/pixel limit/);
      expect((await encodeBuffer(gradient(40, 20), { format: 'png' })).data.length).toBeGreaterThan(0);
    } finally {
      if (saved === undefined) delete process.env.KINHUE_MAX_PIXELS;
      else process.env.KINHUE_MAX_PIXELS = saved;
    }
  });
});

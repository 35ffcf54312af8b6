/**
 * The plain pixel object every module after decoding works on: interleaved samples, upright,
 * sRGB-encoded (grey is sRGB-encoded grey), 8 or 16 bits per sample.
 */

export type ChannelCount = 1 | 2 | 3 | 4;
export type BitDepth = 8 | 16;

export interface Pixels {
  width: number;
  height: number;
  /** 1 grey, 2 grey + alpha, 3 RGB, 4 RGB + alpha. */
  channels: ChannelCount;
  depth: BitDepth;
  /** `Uint8Array` when depth is 8, `Uint16Array` when depth is 16; length = width * height * channels. */
  data: Uint8Array | Uint16Array;
}

/** True when the pixels carry an alpha channel (2 or 4 channels). */
export function hasAlpha(pixels: Pick<Pixels, 'channels'>): boolean {
  return pixels.channels === 2 || pixels.channels === 4;
}

/** Colour channels without alpha: 1 for grey, 3 for RGB. */
export function colourChannels(pixels: Pick<Pixels, 'channels'>): 1 | 3 {
  return pixels.channels <= 2 ? 1 : 3;
}

/**
 * Checks that a pixel object is self-consistent and returns it; throws a plain Error (a bug in
 * the caller, not a user problem) when it is not.
 *
 * @example
 * const px = checkPixels({ width: 2, height: 1, channels: 1, depth: 8, data: new Uint8Array([0, 255]) });
 */
export function checkPixels(pixels: Pixels): Pixels {
  const { width, height, channels, depth, data } = pixels;
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    throw new Error(`Pixels: bad size ${width}x${height}`);
  }
  if (![1, 2, 3, 4].includes(channels)) throw new Error(`Pixels: bad channel count ${channels}`);
  if (depth === 8 && !(data instanceof Uint8Array)) throw new Error('Pixels: depth 8 needs a Uint8Array');
  if (depth === 16 && !(data instanceof Uint16Array)) throw new Error('Pixels: depth 16 needs a Uint16Array');
  if (data.length !== width * height * channels) {
    throw new Error(`Pixels: data has ${data.length} samples, expected ${width * height * channels}`);
  }
  return pixels;
}

/**
 * Wraps a Buffer of raw samples from sharp as a typed array without copying.
 * A 16-bit buffer at an odd byte offset is copied (typed arrays need aligned offsets).
 */
export function samplesFromBuffer(buf: Buffer, depth: BitDepth): Uint8Array | Uint16Array {
  if (depth === 8) return new Uint8Array(buf.buffer, buf.byteOffset, buf.length);
  if (buf.byteOffset % 2 === 0) return new Uint16Array(buf.buffer, buf.byteOffset, buf.length / 2);
  return new Uint16Array(Uint8Array.prototype.slice.call(buf).buffer);
}

/** The samples as a Buffer view (no copy), as sharp's raw input wants. */
export function samplesAsBuffer(data: Uint8Array | Uint16Array): Buffer {
  return Buffer.from(data.buffer, data.byteOffset, data.byteLength);
}

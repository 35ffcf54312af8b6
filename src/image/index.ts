// Image input and output: the one place sharp touches pixels. Re-exports only.
export * from './pixels.js';
export * from './limits.js';
export * from './decode.js';
export * from './tone.js';
export * from './encode.js';
export * from './xmp.js';
export { exifOrientation, exifForUprightOutput } from './exif.js';
export { iccColourSpace, iccFitsChannels, srgbProfile } from './icc.js';
export * from './grey-map.js';

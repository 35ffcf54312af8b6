// Colour science on typed arrays. Re-exports only.
export {
  srgbToLinear,
  linearToSrgb,
  linearToSrgbClipped,
  linearToSrgb8,
  linearToSrgb16,
  SRGB8_TO_LINEAR,
  srgb16ToLinearTable,
} from './srgb.js';
export { D65_WHITE, SRGB_TO_XYZ, XYZ_TO_SRGB, linearSrgbToXyz, xyzToLinearSrgb, type Triple } from './xyz.js';
export { LAB_EPSILON, LAB_KAPPA, labF, labFInverse, lightnessFromY, yFromLightness } from './cube-root.js';
export * from './lab.js';
export * from './ciede2000.js';
export * from './colourfulness.js';
export * from './gamut.js';
export * from './metrics.js';
export * from './hue-agreement.js';
export * from './bilateral-upsample.js';
export {
  areaMean,
  downscaleToFloatRgb,
  fitInside,
  PlaneShrinker,
  resizePlane,
  resizeRows,
  sampleCrop,
  shrinkPlane,
  type CropWindow,
  type FloatRgb,
  type Samples,
} from './resample.js';
export * from './chroma-limit.js';
export * from './working-colour.js';

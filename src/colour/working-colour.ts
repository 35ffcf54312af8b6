/**
 * Colour at the working size, the shape shared by restore (which makes it) and by hints and reference
 * photos (which adjust it in place before it is brought up to full resolution).
 */
export interface WorkingColour {
  width: number;
  height: number;
  /** L* averaged down to the working size (0-100). */
  L: Float32Array;
  /** Predicted a*, b* at the working size; a refine step may change them in place. */
  a: Float32Array;
  b: Float32Array;
  /** Model confidence 0-1 at the model's output size (a quarter of the working size). */
  confidence: Float32Array;
  confidenceWidth: number;
  confidenceHeight: number;
}

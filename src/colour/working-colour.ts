/**
 * Colour at the working size: the shape restore's predict stage makes, and the shape its guides (colour
 * hints, reference photos) take and give back before render brings the colour up to full resolution.
 */
export interface WorkingColour {
  width: number;
  height: number;
  /** L* averaged down to the working size (0-100). */
  L: Float32Array;
  /** Predicted a*, b* at the working size. */
  a: Float32Array;
  b: Float32Array;
  /** Model confidence 0-1 at the model's output size (a quarter of the working size). */
  confidence: Float32Array;
  confidenceWidth: number;
  confidenceHeight: number;
}

/** What a guide reads: L*, a*b* and the model's confidence (0-1), all at the working size. */
export type GuideInput = Omit<WorkingColour, 'confidenceWidth' | 'confidenceHeight'>;

/** What a guide gives back: new a*b* at the working size and the fields it adds to its own record. */
export interface GuideOutput {
  a: Float32Array;
  b: Float32Array;
  record: Record<string, unknown>;
}

/**
 * One guide (colour hints, reference photos, ...): a pure step from the working colour to new colour.
 * `name` is its key in the scan's guidance record; guides apply in list order, each to the last one's colour.
 */
export interface Guide {
  name: string;
  apply: (colour: GuideInput) => GuideOutput;
}

/**
 * Stage 4, guide: each guide (reference photos, colour hints, ...) in turn takes the working colour with
 * the model's confidence at the working size and gives back new colour and its record.
 */
import { resizePlane, type Guide, type WorkingColour } from '../../colour/index.js';

/**
 * The working colour after every guide, and each guide's record keyed by its name. Without guides the
 * colour comes back as it was.
 * @example
 *   const { colour, records } = applyGuides(predicted, guidance.guides);
 */
export function applyGuides(colour: WorkingColour, guides: readonly Guide[]): { colour: WorkingColour; records: Record<string, Record<string, unknown>> } {
  const records: Record<string, Record<string, unknown>> = {};
  if (guides.length === 0) return { colour, records };
  const { width, height } = colour;
  const confidence = colour.confidenceWidth === width && colour.confidenceHeight === height
    ? colour.confidence
    : resizePlane(colour.confidence, colour.confidenceWidth, colour.confidenceHeight, width, height);
  let { a, b } = colour;
  for (const guide of guides) {
    const out = guide.apply({ width, height, L: colour.L, a, b, confidence });
    ({ a, b } = out);
    records[guide.name] = { ...records[guide.name], ...out.record };
  }
  return { colour: { ...colour, a, b }, records };
}

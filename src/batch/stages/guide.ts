/**
 * Stage 4, guide: each guide (reference photos, colour hints, ...) in turn takes the working colour with
 * the model's confidence at the working size and gives back new colour and its record.
 */
import { resizePlane, type Guide, type WorkingColour } from '../../colour/index.js';
import { applySkinPrior } from '../../hints/index.js';
import { findFaces, type FaceFinder } from '../../model/index.js';

/**
 * The skin prior as a guide: the faces found in the working L* get a skin hue (hints/skin-prior.ts). Its
 * record is empty when no face was found, so the scan's record says nothing of it.
 * @example
 *   const guides = [skinGuide(await loadFaceFinder()), ...guidance.guides];
 */
export function skinGuide(finder: FaceFinder): Guide {
  return {
    name: 'skin',
    apply: ({ L, a, b, width, height }) => {
      const faces = findFaces(finder, L, width, height);
      if (faces.length === 0) return { a, b, record: {} };
      const out = applySkinPrior(L, a, b, width, height, faces);
      return { a: out.a, b: out.b, record: { ...out.record } };
    },
  };
}

/**
 * The working colour after every guide, and each guide's record keyed by its name. Without guides the
 * colour comes back as it was.
 * @example
 *   const { colour, records } = applyGuides(predicted, guidance.guides);
 */
export function applyGuides(
  colour: WorkingColour,
  guides: readonly Guide[],
): { colour: WorkingColour; records: Record<string, Record<string, unknown>> } {
  const records: Record<string, Record<string, unknown>> = {};
  if (guides.length === 0) return { colour, records };
  const { width, height } = colour;
  const confidence =
    colour.confidenceWidth === width && colour.confidenceHeight === height
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

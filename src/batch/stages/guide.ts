/**
 * Stage 4, guide: each guide (reference photos, colour hints, ...) in turn takes the working colour with
 * the model's confidence at the working size and gives back new colour and its record.
 */
import { bilateralUpsample, resizePlane, shrinkPlane, type Guide, type WorkingColour } from '../../colour/index.js';
import { applySkinPrior } from '../../hints/index.js';
import { findFaces, recallColours, type FaceFinder, type RecallSettings } from '../../model/index.js';
import type { ModelMemory } from '../memory.js';
import { TO_WORKING_SIZE, type PredictedColour } from './predict.js';

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
 * An a*b* change under this is not counted as a change in the memory's record: the just noticeable
 * difference of CIELAB, about 2.3 (Sharma, Digital Color Imaging Handbook, 2003; from memory).
 */
export const NOTICEABLE_AB = 2.3;

/**
 * The colour memory as a guide for one scan whose decoder features (at the model's output cells) are
 * known: each cell moves towards the colour its nearest memory cells recall, by the weight the recall
 * deserves, and the change is carried to the working size edge-aware. A cell the memory does not
 * recognise keeps the model's colour (exactly, where no recognised cell is near). Its record: the memory's
 * hash, photos and cells, and the working-size pixels it changed noticeably.
 * @example
 *   const guide = memoryGuide(memory, predicted);
 */
export function memoryGuide(
  memory: ModelMemory,
  scan: Pick<PredictedColour, 'features' | 'confidenceWidth' | 'confidenceHeight'>,
  settings: Partial<RecallSettings> = {},
): Guide {
  const { features, confidenceWidth: cw, confidenceHeight: ch } = scan;
  if (!features) throw new RangeError('memoryGuide: the prediction was made without its features');
  return {
    name: 'memory',
    apply: ({ L, a, b, width, height }) => {
      const t = performance.now();
      const recalled = recallColours(memory.memory, features.data, settings);
      const cellA = shrinkPlane(a, width, height, cw, ch);
      const cellB = shrinkPlane(b, width, height, cw, ch);
      for (let i = 0; i < cw * ch; i++) {
        const w = recalled.weight[i]!;
        cellA[i] = w * (recalled.a[i]! - cellA[i]!);
        cellB[i] = w * (recalled.b[i]! - cellB[i]!);
      }
      const change = bilateralUpsample(shrinkPlane(L, width, height, cw, ch), cellA, cellB, cw, ch, L, width, height, TO_WORKING_SIZE);
      const outA = new Float32Array(width * height);
      const outB = new Float32Array(width * height);
      let changed = 0;
      for (let i = 0; i < width * height; i++) {
        outA[i] = a[i]! + change.a[i]!;
        outB[i] = b[i]! + change.b[i]!;
        if (Math.hypot(change.a[i]!, change.b[i]!) >= NOTICEABLE_AB) changed++;
      }
      const record = {
        sha256: memory.sha256,
        photos: memory.photos,
        cells: memory.memory.a.length,
        pixels: changed,
        share: Number((changed / (width * height)).toFixed(4)),
        milliseconds: Math.round(performance.now() - t),
      };
      return { a: outA, b: outB, record };
    },
  };
}

/**
 * The guides of one scan in the order they apply: the skin prior (a guess), the colour memory (the
 * archive's own photographs), then the scan's reference and hints (chosen by the archivist for this run
 * or scan, so they have the last word).
 * @example
 *   const guides = scanGuides(predicted, { faceFinder, memory }, guidance.guides);
 */
export function scanGuides(
  predicted: PredictedColour,
  options: { faceFinder?: FaceFinder; memory?: ModelMemory },
  chosen: readonly Guide[],
): Guide[] {
  return [
    ...(options.faceFinder ? [skinGuide(options.faceFinder)] : []),
    ...(options.memory ? [memoryGuide(options.memory, predicted)] : []),
    ...chosen,
  ];
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

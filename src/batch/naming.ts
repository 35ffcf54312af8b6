/**
 * Output names: each source's relative path mirrored under the output folder, in the chosen format,
 * with `<name>.confidence.png` and `<name>.kinhue.json` beside it. Two inputs never share an output name:
 * sources differing only by extension (or letter case) get the extension in their name, and any
 * remaining clash gets a number. A name too long for the file system with `.confidence.png` added is
 * shortened the same way every time (see fitName).
 */
import { extname, posix } from 'node:path';
import { fitName, NAME_MAX_BYTES } from '../files/index.js';
import { extensionFor, formatForPath, type OutputFormat } from '../image/index.js';
import type { SourceFile } from '../files/index.js';
import type { FormatChoice } from './options.js';

export interface PlannedOutputs {
  /** Relative to the output folder, '/'-separated. */
  image: string;
  confidence: string;
  record: string;
  format: OutputFormat;
}

/** The format a result is written in: --format, or the source's own (PNG for formats kinhue does not write). */
export function outputFormatFor(sourcePath: string, choice: FormatChoice): OutputFormat {
  if (choice !== 'same') return choice;
  return formatForPath(sourcePath) ?? 'png';
}

/**
 * Plans the outputs of every source, in the sources' order.
 * @example
 *   planOutputs([{ path: '/s/a.jpg', rel: 'a.jpg' }, { path: '/s/a.png', rel: 'a.png' }], 'same');
 *   // a_jpg.jpg, a_png.png (and their .confidence.png / .kinhue.json)
 */
export function planOutputs(files: SourceFile[], choice: FormatChoice): PlannedOutputs[] {
  const stemOf = (rel: string): string => rel.slice(0, rel.length - extname(rel).length);
  const groups = new Map<string, number>();
  for (const f of files) {
    const key = stemOf(f.rel).toLowerCase();
    groups.set(key, (groups.get(key) ?? 0) + 1);
  }
  const used = new Set<string>();
  return files.map((f) => {
    const format = outputFormatFor(f.path, choice);
    const sourceExt = extname(f.rel);
    const ext = choice === 'same' && formatForPath(f.path) ? sourceExt : extensionFor(format);
    let stem = stemOf(f.rel);
    if ((groups.get(stem.toLowerCase()) ?? 0) > 1 && sourceExt) stem = `${stem}_${sourceExt.slice(1).toLowerCase()}`;
    stem = fitStem(stem, Math.max(Buffer.byteLength(ext), Buffer.byteLength(CONFIDENCE_SUFFIX)));
    let candidate = stem;
    for (let n = 2; ; n++) {
      const names = [`${candidate}${ext}`, `${candidate}${CONFIDENCE_SUFFIX}`, `${candidate}${RECORD_SUFFIX}`];
      if (names.every((name) => !used.has(name.toLowerCase()))) {
        for (const name of names) used.add(name.toLowerCase());
        return { image: names[0]!, confidence: names[1]!, record: names[2]!, format };
      }
      candidate = `${stem}-${n}`;
    }
  });
}

const CONFIDENCE_SUFFIX = '.confidence.png';

/** The stem with its last part shortened when that part plus `suffixBytes` would pass the name limit (room kept for a `-n`). */
function fitStem(stem: string, suffixBytes: number): string {
  const cut = stem.lastIndexOf('/') + 1;
  const name = stem.slice(cut);
  if (Buffer.byteLength(name) + suffixBytes <= NAME_MAX_BYTES) return stem;
  return stem.slice(0, cut) + fitName(name, NAME_MAX_BYTES - suffixBytes - 4);
}

/** The repair outputs beside a result: the mask `<name>.repair.png` and the repaired scan `<name>.repaired.<ext>`. */
export function repairOutputs(outputs: PlannedOutputs): { mask: string; scan: string } {
  const stem = outputs.record.slice(0, -RECORD_SUFFIX.length);
  return { mask: `${stem}.repair.png`, scan: `${stem}.repaired${extname(outputs.image)}` };
}

const RECORD_SUFFIX = '.kinhue.json';

/**
 * Every file a scan's result may have, repair outputs included.
 * @example
 *   allOutputs(outputs); // ['barn.jpg', 'barn.confidence.png', 'barn.kinhue.json', 'barn.repair.png', 'barn.repaired.jpg']
 */
export function allOutputs(outputs: PlannedOutputs): string[] {
  const repair = repairOutputs(outputs);
  return [outputs.image, outputs.confidence, outputs.record, repair.mask, repair.scan];
}

/** The repair outputs a finished result has (none when it was not repaired). */
export function repairCompanions(outputs: PlannedOutputs, repair: { scan: string | null } | undefined): string[] {
  if (!repair) return [];
  const names = repairOutputs(outputs);
  return [names.mask, ...(repair.scan ? [names.scan] : [])];
}

/** The folder part of a planned relative path ('' at the top). */
export function relativeFolder(rel: string): string {
  const d = posix.dirname(rel);
  return d === '.' ? '' : d;
}

/**
 * Output names: each source's relative path mirrored under the output folder, in the chosen format,
 * with `<name>.confidence.png` and `<name>.kinhue.json` beside it. Two inputs never share an output name:
 * sources differing only by extension (or letter case) get the extension in their name, and any
 * remaining clash gets a number.
 */
import { extname, posix } from 'node:path';
import { extensionFor, formatForPath, type OutputFormat } from '../image/index.js';
import type { SourceFile } from './discovery.js';
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
    let candidate = stem;
    for (let n = 2; ; n++) {
      const names = [`${candidate}${ext}`, `${candidate}.confidence.png`, `${candidate}.kinhue.json`];
      if (names.every((name) => !used.has(name.toLowerCase()))) {
        for (const name of names) used.add(name.toLowerCase());
        return { image: names[0]!, confidence: names[1]!, record: names[2]!, format };
      }
      candidate = `${stem}-${n}`;
    }
  });
}

/** The folder part of a planned relative path ('' at the top). */
export function relativeFolder(rel: string): string {
  const d = posix.dirname(rel);
  return d === '.' ? '' : d;
}

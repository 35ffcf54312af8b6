/** `kinhue hints <scan>`: a starter hints file beside the scan, ready to edit. */
import { access } from 'node:fs/promises';
import { basename } from 'node:path';
import { decodeImage } from '../image/index.js';
import { ErrorCodes, KinhueError } from '../errors.js';
import { InputGuard, writeFileAtomic } from '../files/index.js';
import { formatHints, starterHints } from './hints-file.js';
import { hintsCandidates } from './guidance.js';

export interface StarterOptions {
  /** Where to write; default `<name>.hints.json` beside the scan. */
  out?: string;
  /** Replace an existing file. */
  force?: boolean;
}

export interface StarterResult {
  path: string;
  width: number;
  height: number;
  entries: number;
}

/**
 * Writes a starter hints file for a scan (its upright size and placeholder entries), atomically; never
 * replaces an existing file unless `force` is set, and never the scan itself (KH_OUTPUT_ON_INPUT),
 * whatever link or other name leads to it.
 *
 * @example
 *   const { path } = await writeStarterHints('scans/barn.jpg'); // scans/barn.hints.json
 */
export async function writeStarterHints(scan: string, options: StarterOptions = {}): Promise<StarterResult> {
  const path = options.out ?? hintsCandidates(scan).at(-1)!;
  await (await InputGuard.of([scan], { hint: 'name another --out file for the hints' })).check(path);
  if (!options.force) {
    const exists = await access(path).then(
      () => true,
      () => false,
    );
    if (exists) {
      throw new KinhueError(ErrorCodes.WRITE_FAILED, 'a hints file is already there', {
        file: path,
        hint: 'edit it, or add --force to replace it with a new starter file',
      });
    }
  }
  const { pixels } = await decodeImage(scan);
  const json = starterHints(pixels.width, pixels.height, basename(scan));
  await writeFileAtomic(path, formatHints(json));
  return { path, width: pixels.width, height: pixels.height, entries: json.entries.length };
}

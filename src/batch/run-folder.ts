/**
 * All manifests of one output folder, read as one. A run of all scans appends to `kinhue-run.jsonl`;
 * each part of a split run appends to its own, `kinhue-run.part-<K>-of-<N>.<host>.jsonl`, so parts on
 * many machines share the folder without locks: no two machines ever append to one file (appends
 * from two machines to one file on a network file system can interleave), and a repair of a
 * cut-short last line only ever touches this machine's own manifest, never one another part may be
 * writing. Resume, --dry-run, `sheet` and `progress` read them all: the last record per output name,
 * by its time, wins.
 */
import { readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { ErrorCodes, KinhueError } from '../errors.js';
import { loadManifest, type ManifestContents, type ManifestRecord } from './manifest.js';
import { MANIFEST_NAME } from './options.js';
import type { Part } from './part.js';

/** `kinhue-run.part-<K>-of-<N>.<host>.jsonl`. */
const PART_MANIFEST = /^kinhue-run\.part-(\d+)-of-(\d+)\.([A-Za-z0-9-]+)\.jsonl$/;

/**
 * The manifest a run appends to: `kinhue-run.jsonl` for a run of all scans, one per part and machine
 * for a part.
 * @example
 *   manifestName({ index: 2, count: 3 }, 'node07'); // 'kinhue-run.part-2-of-3.node07.jsonl'
 */
export function manifestName(part: Part | null | undefined, host: string): string {
  return part ? `kinhue-run.part-${part.index}-of-${part.count}.${host}.jsonl` : MANIFEST_NAME;
}

/** One manifest of the folder. */
export interface ManifestFile {
  name: string;
  path: string;
  /** The part it belongs to (from its name); null for `kinhue-run.jsonl`. */
  part: Part | null;
  /** The machine that writes it; null for `kinhue-run.jsonl`. */
  host: string | null;
  contents: ManifestContents;
}

export interface RunFolder {
  folder: string;
  /** Every manifest, by name. */
  manifests: ManifestFile[];
  /** The last record per output name over all manifests: the latest by time. */
  records: Map<string, ManifestRecord>;
  /** Lines that were not records, said for people. */
  notes: string[];
}

/**
 * Reads every manifest in `folder` (none when it does not exist). `own` names the manifest this
 * process appends to: only its cut-short last line is noted as damage (see loadManifest's `growing`).
 * @example
 *   const run = await loadRunFolder('restored');
 *   run.records.get('barn.jpg')?.status; // 'done'
 */
export async function loadRunFolder(folder: string, own?: string): Promise<RunFolder> {
  let names: string[];
  try {
    names = await readdir(folder);
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    if (code !== 'ENOENT') {
      throw new KinhueError(ErrorCodes.UNREADABLE, `the output folder could not be read (${code ?? (error as Error).message})`, {
        file: folder,
        hint: 'check its permissions, or choose another --out folder',
        cause: error,
      });
    }
    names = [];
  }
  const wanted = names.filter((n) => n === MANIFEST_NAME || PART_MANIFEST.test(n)).sort();
  const manifests: ManifestFile[] = [];
  for (const name of wanted) {
    const match = PART_MANIFEST.exec(name);
    const path = join(folder, name);
    manifests.push({
      name,
      path,
      part: match ? { index: Number(match[1]), count: Number(match[2]) } : null,
      host: match ? match[3]! : null,
      contents: await loadManifest(path, { growing: name !== own }),
    });
  }
  const records = new Map<string, ManifestRecord>();
  for (const m of manifests) {
    for (const [output, record] of m.contents.records) {
      const seen = records.get(output);
      if (!seen || record.time >= seen.time) records.set(output, record);
    }
  }
  return { folder, manifests, records, notes: manifests.flatMap((m) => m.contents.notes) };
}

/**
 * The numbers of parts the folder's part manifests were written for (sorted; empty when none).
 * @example
 *   splitCounts(await loadRunFolder('restored')); // [3]
 */
export function splitCounts(run: RunFolder): number[] {
  return [...new Set(run.manifests.flatMap((m) => (m.part ? [m.part.count] : [])))].sort((x, y) => x - y);
}

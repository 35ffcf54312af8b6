/**
 * Searching folders recursively the way a person expects: links to folders are followed, but each
 * real folder is searched once (a link back up the tree would otherwise repeat it forever or twice),
 * folders reached directly are preferred to links, and a folder that cannot be read or a link that
 * leads nowhere is reported instead of being skipped in silence.
 */
import type { Dirent } from 'node:fs';
import { readdir, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { statId } from './identity.js';

export interface WalkProblem {
  path: string;
  kind: 'folder' | 'link';
  error: NodeJS.ErrnoException;
}

export interface FoundFile {
  path: string;
  /** `device:inode`, the same for every path that leads to this file. */
  id: string;
}

export interface WalkOptions {
  /** Which files to list, by path. */
  wanted: (path: string) => boolean;
  /** Folders not to search (by `device:inode`), e.g. the output folder inside an input folder. */
  skip?: ReadonlySet<string>;
  /** Called when a skipped folder is met. */
  onSkip?: (path: string) => void;
}

export interface WalkResult {
  files: FoundFile[];
  problems: WalkProblem[];
}

/**
 * Every wanted file under `root` (hidden names left out), each real file once, sorted within a folder.
 * @example
 *   const { files, problems } = await walkFolder('scans', { wanted: (p) => p.endsWith('.tif') });
 */
export async function walkFolder(root: string, options: WalkOptions, seenFolders = new Set<string>()): Promise<WalkResult> {
  const files: FoundFile[] = [];
  const problems: WalkProblem[] = [];
  const seenFiles = new Set<string>();
  // Folders reached directly are searched before those reached through links, so paths stay as the tree has them.
  const direct: string[] = [root];
  const linked: string[] = [];
  while (direct.length || linked.length) {
    const folder = (direct.length ? direct.shift() : linked.shift())!;
    let info;
    let entries: Dirent[];
    try {
      info = await stat(folder);
      if (seenFolders.has(statId(info))) continue;
      seenFolders.add(statId(info));
      if (options.skip?.has(statId(info))) {
        options.onSkip?.(folder);
        continue;
      }
      entries = await readdir(folder, { withFileTypes: true });
    } catch (error) {
      problems.push({ path: folder, kind: 'folder', error: error as NodeJS.ErrnoException });
      continue;
    }
    // Files themselves before links to them, so a file reached both ways keeps its own path.
    const order = (e: Dirent): string => `${e.isSymbolicLink() ? 1 : 0}${e.name}`;
    entries.sort((x, y) => (order(x) < order(y) ? -1 : order(x) > order(y) ? 1 : 0));
    for (const entry of entries) {
      if (entry.name.startsWith('.')) continue;
      const path = join(folder, entry.name);
      if (entry.isDirectory()) {
        direct.push(path);
        continue;
      }
      if (!entry.isFile() && !entry.isSymbolicLink()) continue;
      let target;
      try {
        target = await stat(path);
      } catch (error) {
        // A link that leads nowhere (or round in a loop) matters when it is named like a wanted file.
        if (entry.isSymbolicLink() && options.wanted(path)) problems.push({ path, kind: 'link', error: error as NodeJS.ErrnoException });
        continue;
      }
      if (target.isDirectory()) linked.push(path);
      else if (target.isFile() && options.wanted(path) && !seenFiles.has(statId(target))) {
        seenFiles.add(statId(target));
        files.push({ path, id: statId(target) });
      }
    }
  }
  return { files, problems };
}

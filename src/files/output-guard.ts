/**
 * The promise that kinhue never changes an input, checked where outputs are planned: an output that
 * leads to an input file (the same path, a link to it, a hard link, or a bind mount of its folder) is
 * refused, and so is writing into a folder that is, or holds, an input folder.
 */
import { readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { ErrorCodes, KinhueError } from '../errors.js';
import { identify, isWithin, type PathIdentity } from './identity.js';

/** KH_OUTPUT_ON_INPUT: naming the output, the input it would replace, and what to do. */
export class OutputOnInputError extends KinhueError {
  constructor(output: string, input: string, hint: string, message?: string) {
    super(ErrorCodes.OUTPUT_ON_INPUT, message ?? `this output would replace the input ${input} (the same file, through a link or another path); kinhue never changes an input`, {
      file: output,
      hint,
    });
    this.name = 'OutputOnInputError';
  }
}

/** The default next step: most often the output folder is the input folder under another name. */
export const OUTPUT_ON_INPUT_HINT = 'choose an output that is not one of your inputs, nor a link to them or to their folder';

/**
 * The inputs of one command, by real path and by device and inode.
 * @example
 *   const guard = await InputGuard.of(['scans/a.jpg', 'scans/b.jpg']);
 *   await guard.check('restored/a.jpg'); // throws OutputOnInputError when restored/ is a link to scans/
 */
export class InputGuard {
  private readonly byId = new Map<string, string>();
  private readonly byReal = new Map<string, string>();
  private readonly folders: { path: string; identity: PathIdentity }[] = [];

  constructor(private readonly hint: string = OUTPUT_ON_INPUT_HINT) {}

  /** A guard over these input files. */
  static async of(files: Iterable<string>, hint?: string): Promise<InputGuard> {
    const guard = new InputGuard(hint);
    for (const file of files) await guard.add(file);
    return guard;
  }

  /** Adds an input file, or a folder whose whole content is input (a model folder). */
  async add(path: string, identity?: PathIdentity): Promise<void> {
    const found = identity ?? (await identify(path));
    if (found.directory) this.folders.push({ path, identity: found });
    if (found.id) this.byId.set(found.id, path);
    this.byReal.set(found.real, path);
  }

  /** The input `output` would replace, if any. */
  async inputAt(output: string): Promise<string | undefined> {
    const found = await identify(output);
    const same = (found.id && this.byId.get(found.id)) || this.byReal.get(found.real);
    if (same) return same;
    for (const folder of this.folders) if (await isWithin(found, folder.identity)) return folder.path;
    return undefined;
  }

  /** Throws OutputOnInputError when writing `output` would replace an input. */
  async check(output: string): Promise<void> {
    const input = await this.inputAt(output);
    if (input !== undefined) throw new OutputOnInputError(output, input, this.hint);
  }
}

/**
 * The first of `inputs` that is `folder` or lies inside it (through links or bind mounts), if any.
 * @example
 *   await inputInside('models/family', ['photos/', 'models/kinhue-base']); // undefined, or the input
 */
export async function inputInside(folder: string, inputs: string[]): Promise<string | undefined> {
  const identity = await identify(folder);
  if (!identity.id) return undefined; // a folder not made yet holds nothing
  for (const input of inputs) if (await isWithin(input, identity)) return input;
  return undefined;
}

/**
 * Throws OutputOnInputError when a file now inside `folder` is one of the guard's inputs (a hard link
 * or a link to it), for commands that may replace everything in an output folder.
 * @example
 *   await checkFolderFiles('models/family', guard);
 */
export async function checkFolderFiles(folder: string, guard: InputGuard): Promise<void> {
  const names = await readdir(folder).catch(() => [] as string[]);
  for (const name of names) await guard.check(join(folder, name));
}

/**
 * The promise that kinhue never changes an input, checked where outputs are planned: an output that
 * leads to an input file (the same path, a link to it, a hard link, or a bind mount of its folder) is
 * refused; restore also refuses outputs that reach a folder holding inputs, and train/tune an output
 * folder that is, or holds, an input (`inputInside`).
 */
import { readdir } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { ErrorCodes, KinhueError } from '../errors.js';
import { identify, isWithin } from './identity.js';

/** KH_OUTPUT_ON_INPUT: naming the output, the input it would replace, and what to do. */
export class OutputOnInputError extends KinhueError {
  constructor(output: string, input: string, hint: string, message?: string) {
    super(
      ErrorCodes.OUTPUT_ON_INPUT,
      message ??
        `this output would replace the input ${input} (the same file, through a link or another path); kinhue never changes an input`,
      {
        file: output,
        hint,
      },
    );
    this.name = 'OutputOnInputError';
  }
}

/** The default next step: most often the output folder is the input folder under another name. */
export const OUTPUT_ON_INPUT_HINT = 'choose an output that is not one of your inputs, nor a link to them or to their folder';

/** How strict a guard is. */
export interface GuardOptions {
  /** The next step named in a refusal. */
  hint?: string;
  /**
   * Also refuse outputs that would be written into a folder holding inputs (through a link inside the
   * output folder, say), for commands whose results belong in their output folder only.
   */
  outsideInputFolders?: boolean;
}

/**
 * The inputs of one command, by real path and by device and inode (and, when asked, their folders).
 * @example
 *   const guard = await InputGuard.of(['scans/a.jpg', 'scans/b.jpg']);
 *   await guard.check('restored/a.jpg'); // throws OutputOnInputError when restored/ is a link to scans/
 */
export class InputGuard {
  private readonly byId = new Map<string, string>();
  private readonly byReal = new Map<string, string>();
  private readonly byFolder = new Map<string, string>();
  private readonly hint: string;

  constructor(private readonly options: GuardOptions = {}) {
    this.hint = options.hint ?? OUTPUT_ON_INPUT_HINT;
  }

  /** A guard over these input files. */
  static async of(files: Iterable<string>, options?: GuardOptions): Promise<InputGuard> {
    const guard = new InputGuard(options);
    for (const file of files) await guard.add(file);
    return guard;
  }

  /** Adds an input file. */
  async add(path: string): Promise<void> {
    const found = await identify(path);
    if (found.id) this.byId.set(found.id, path);
    this.byReal.set(found.real, path);
    if (this.options.outsideInputFolders) {
      const folder = await identify(dirname(found.real));
      if (folder.id && !this.byFolder.has(folder.id)) this.byFolder.set(folder.id, path);
    }
  }

  /** Throws OutputOnInputError when writing `output` would replace an input (or write into an input's folder, when asked). */
  async check(output: string): Promise<void> {
    const found = await identify(output);
    const same = (found.id && this.byId.get(found.id)) || this.byReal.get(found.real);
    if (same) throw new OutputOnInputError(output, same, this.hint);
    if (!this.options.outsideInputFolders) return;
    const folder = await identify(dirname(found.real));
    const beside = folder.id && this.byFolder.get(folder.id);
    if (beside) {
      throw new OutputOnInputError(
        output,
        beside,
        this.hint,
        `this output would be written into ${dirname(beside)}, the folder of the input ${beside} (through a link or another path); results go only into the output folder`,
      );
    }
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

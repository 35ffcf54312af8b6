/**
 * Progress for long commands: on a terminal, one line redrawn in place with a bar; elsewhere (a log
 * file, a pipe, CI) a plain line now and then, so logs stay readable. Shared by every verb that runs
 * for long (restore, train, tune).
 */

export interface ProgressOptions {
  /** Where to draw. Default process.stderr. */
  stream?: NodeJS.WriteStream | { write(text: string): boolean; isTTY?: boolean; columns?: number };
  /** Force terminal or plain behaviour (default: the stream's isTTY). */
  tty?: boolean;
  /** Least seconds between plain lines. Default 10. */
  plainInterval?: number;
  /** Width of the bar in characters on a terminal. Default 24. */
  barWidth?: number;
}

/**
 * A progress display.
 * @example
 *   const progress = new Progress();
 *   progress.update(0.5, 'step 50/100  loss 2.31');
 *   progress.log('checkpoint written');
 *   progress.done('finished');
 */
export class Progress {
  private readonly stream: NonNullable<ProgressOptions['stream']>;
  private readonly tty: boolean;
  private readonly plainInterval: number;
  private readonly barWidth: number;
  private lastDraw = 0;
  private lastPlain = -Infinity;
  private drawn = false;

  constructor(options: ProgressOptions = {}) {
    this.stream = options.stream ?? process.stderr;
    this.tty = options.tty ?? Boolean(this.stream.isTTY);
    this.plainInterval = (options.plainInterval ?? 10) * 1000;
    this.barWidth = options.barWidth ?? 24;
  }

  /** Shows `fraction` (0-1, or undefined when unknown) done, with a short status text. */
  update(fraction: number | undefined, text: string, force = false): void {
    const now = Date.now();
    if (this.tty) {
      if (!force && now - this.lastDraw < 100) return;
      this.lastDraw = now;
      // Some terminals report a width of 0 (under `script`, say): treat that as unknown.
      const columns = (this.stream as { columns?: number }).columns || 100;
      const line = `${fraction === undefined ? '' : `${bar(fraction, this.barWidth)} ${percent(fraction)}  `}${text}`;
      this.stream.write(`\r\x1b[2K${line.slice(0, Math.max(10, columns - 1))}`);
      this.drawn = true;
    } else {
      if (!force && now - this.lastPlain < this.plainInterval) return;
      this.lastPlain = now;
      this.stream.write(`${fraction === undefined ? '' : `${percent(fraction)}  `}${text}\n`);
    }
  }

  /** Prints a line of its own above the bar. */
  log(line: string): void {
    this.clear();
    this.stream.write(`${line}\n`);
  }

  /** Removes the bar and prints a last line, if given. */
  done(line?: string): void {
    this.clear();
    if (line) this.stream.write(`${line}\n`);
  }

  private clear(): void {
    if (this.tty && this.drawn) {
      this.stream.write('\r\x1b[2K');
      this.drawn = false;
    }
  }
}

function bar(fraction: number, width: number): string {
  const f = Math.max(0, Math.min(1, fraction));
  const full = Math.round(f * width);
  return `[${'#'.repeat(full)}${'.'.repeat(width - full)}]`;
}

function percent(fraction: number): string {
  return `${Math.floor(Math.max(0, Math.min(1, fraction)) * 100)
    .toString()
    .padStart(3)}%`;
}

/**
 * Seconds as "1h 02m", "3m 05s" or "42s", for time left and elapsed.
 * @example
 *   formatDuration(3725); // "1h 02m"
 */
export function formatDuration(seconds: number): string {
  if (!Number.isFinite(seconds) || seconds < 0) return '?';
  const s = Math.round(seconds);
  if (s >= 3600) return `${Math.floor(s / 3600)}h ${String(Math.floor((s % 3600) / 60)).padStart(2, '0')}m`;
  if (s >= 60) return `${Math.floor(s / 60)}m ${String(s % 60).padStart(2, '0')}s`;
  return `${s}s`;
}

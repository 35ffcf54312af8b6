/**
 * Command-line options derived from the core option types: each verb lists the core options it offers
 * in one table keyed by their core names, so a name, a type or a default cannot differ between the two,
 * and the handler passes the parsed values on without copying them field by field.
 */
import type { Argv, Options } from 'yargs';
import { UsageError } from '../errors.js';

/** A core option's name as typed on the command line: `workSize` -> `work-size`. */
export type Kebab<S extends string> = S extends `${infer Head}${infer Tail}`
  ? `${Head extends Lowercase<Head> ? Head : `-${Lowercase<Head>}`}${Kebab<Tail>}`
  : S;

/** A command line as yargs parses it: the core options' fields under their command-line names. */
export type CliArgs<T> = { [K in keyof T as K extends string ? Kebab<K> : never]: T[K] };

/** What the command line says about one option; `check` returns the problem with a value, if any. */
export interface OptionSpec<V> {
  type: 'string' | 'number' | 'boolean';
  describe: string;
  array?: boolean;
  alias?: string;
  choices?: readonly string[];
  /** Shown in --help and used when the option is not given; take it from the core's defaults. */
  default?: V;
  check?: (value: NonNullable<V>) => string | undefined;
}

/** One entry for every option of T, keyed by its core name: an option of T without an entry does not compile. */
export type OptionTable<T> = { [K in keyof T]-?: OptionSpec<T[K]> };

/**
 * The command-line name of a core option.
 * @example
 *   flagName('workSize'); // 'work-size'
 */
export function flagName(key: string): string {
  return key.replace(/[A-Z]/g, (c) => `-${c.toLowerCase()}`);
}

/**
 * Adds every option of a table to a yargs builder.
 * @example
 *   addOptions(yargs, RESTORE_FLAGS);
 */
export function addOptions<T>(yargs: Argv, table: OptionTable<T>): Argv {
  let out = yargs;
  for (const [key, spec] of Object.entries(table) as [string, OptionSpec<unknown>][]) {
    const { check: _check, choices, ...rest } = spec;
    out = out.option(flagName(key), { ...rest, ...(choices ? { choices: [...choices] } : {}) } as Options);
  }
  return out;
}

/**
 * Runs every option's own check on a parsed command line; throws UsageError with the example.
 * @example
 *   checkOptions(argv, RESTORE_FLAGS, 'kinhue restore scans --out restored');
 */
export function checkOptions<T>(argv: Partial<CliArgs<T>>, table: OptionTable<T>, example: string): void {
  for (const [key, spec] of Object.entries(table) as [string, OptionSpec<unknown>][]) {
    const value = (argv as Record<string, unknown>)[flagName(key)];
    if (value === undefined || value === null) continue;
    const problem = spec.check?.(value);
    if (problem) throw new UsageError(`${problem}\nExample usage: ${example}`);
  }
}

/**
 * The core options a parsed command line gives, under their core names (absent ones left out).
 * @example
 *   coreOptions(argv, RESTORE_FLAGS); // { out: 'restored', workSize: 256, ... }
 */
export function coreOptions<T>(argv: Partial<CliArgs<T>>, table: OptionTable<T>): Partial<T> {
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(table)) {
    const value = (argv as Record<string, unknown>)[flagName(key)];
    if (value !== undefined) out[key] = value;
  }
  return out as Partial<T>;
}

/** Checks shared by several verbs. */
export const checks = {
  folder:
    (flag: string, what: string) =>
    (value: unknown): string | undefined =>
      typeof value !== 'string' || value.trim() === '' ? `--${flag} needs ${what}` : undefined,
  wholeNumber:
    (flag: string, min: number, max: number) =>
    (value: unknown): string | undefined =>
      Number.isInteger(value) && (value as number) >= min && (value as number) <= max
        ? undefined
        : `--${flag} must be a whole number from ${min} to ${max}, got ${value}`,
  share:
    (flag: string, meaning: string) =>
    (value: unknown): string | undefined =>
      typeof value === 'number' && value >= 0 && value <= 1 ? undefined : `--${flag} must be from 0 to 1 (${meaning}), got ${value}`,
  oneOf:
    (flag: string, choices: readonly string[]) =>
    (value: unknown): string | undefined =>
      choices.includes(value as string) ? undefined : `--${flag} must be one of ${choices.join(', ')}, got ${value}`,
};

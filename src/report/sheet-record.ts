/**
 * What the review sheet needs from a provenance record (`<name>.kinhue.json`): a record that parses but
 * lacks one of these fields (edited by hand, written by another tool, cut short) is shown as damaged
 * instead of stopping the sheet.
 */

type Kind = 'string' | 'number' | 'object' | 'array' | 'string-or-null' | 'number-or-null';

/** Dotted paths into ProvenanceRecord and the type each must have. */
const NEEDED: [string, Kind][] = [
  ['kinhue', 'string'],
  ['statement', 'string'],
  ['created', 'string'],
  ['source', 'object'],
  ['source.path', 'string'],
  ['source.relative', 'string'],
  ['source.bytes', 'number'],
  ['source.sha256', 'string'],
  ['source.format', 'string'],
  ['source.width', 'number'],
  ['source.height', 'number'],
  ['source.bitDepth', 'number'],
  ['source.channels', 'number'],
  ['tone', 'object'],
  ['tone.kind', 'string'],
  ['tone.tint', 'object'],
  ['tone.tint.a', 'number'],
  ['tone.tint.b', 'number'],
  ['tone.name', 'string-or-null'],
  ['result', 'object'],
  ['result.image', 'string'],
  ['result.format', 'string'],
  ['result.bitDepth', 'number'],
  ['result.confidenceMap', 'string-or-null'],
  ['model', 'object'],
  ['model.name', 'string'],
  ['model.weightsSha256', 'string'],
  ['settings', 'object'],
  ['settings.workSize', 'number'],
  ['settings.temperature', 'number'],
  ['settings.format', 'string'],
  ['settings.quality', 'number-or-null'],
  ['backend', 'string'],
  ['meanConfidence', 'number'],
  ['timings', 'object'],
  ['timings.total', 'number'],
  ['timings.model', 'number'],
  ['warnings', 'array'],
];

function kindOf(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'array';
  return typeof value;
}

function fits(value: unknown, kind: Kind): boolean {
  const actual = kindOf(value);
  if (kind === 'string-or-null') return actual === 'string' || actual === 'null';
  if (kind === 'number-or-null') return actual === 'null' || (actual === 'number' && Number.isFinite(value));
  if (kind === 'number') return actual === 'number' && Number.isFinite(value);
  return actual === kind;
}

/** How many missing fields a description names. */
const LISTED = 5;

/**
 * What is wrong with a parsed provenance record for the sheet, in words, or undefined when the sheet can
 * show it: the fields it lacks (or holds with the wrong type), parents rather than each of their children.
 *
 * @example
 *   recordDamage({ kinhue: '0.1.0' }); // 'missing or wrong statement, created, source, tone, result and 6 more'
 *   recordDamage([]);                  // 'not a JSON object'
 */
export function recordDamage(record: unknown): string | undefined {
  if (kindOf(record) !== 'object') return 'not a JSON object';
  const problems: string[] = [];
  for (const [path, kind] of NEEDED) {
    if (problems.some((p) => path.startsWith(`${p}.`))) continue;
    const value = path
      .split('.')
      .reduce<unknown>((at, key) => (kindOf(at) === 'object' ? (at as Record<string, unknown>)[key] : undefined), record);
    if (!fits(value, kind)) problems.push(path);
  }
  if (problems.length === 0) return undefined;
  const listed =
    problems.length > LISTED ? `${problems.slice(0, LISTED).join(', ')} and ${problems.length - LISTED} more` : problems.join(', ');
  return `missing or wrong ${listed}`;
}

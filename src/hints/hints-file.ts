/**
 * kinhue's hints file: one JSON file per scan (`<name>.hints.json`), holding the colours a person knows,
 * as points and strokes in the scan's own pixel coordinates. Our own format:
 *
 *   {
 *     "format": "kinhue-hints", "version": 1,
 *     "image": { "width": 3000, "height": 2000 },
 *     "entries": [
 *       { "x": 812, "y": 640, "colour": "#2f5d3a", "radius": 10, "note": "grandmother's coat" },
 *       { "points": [[1400, 300], [1460, 520]], "colour": "rgb(150, 38, 30)", "radius": 8 }
 *     ]
 *   }
 *
 * An entry whose colour is the empty string is a placeholder (the starter file has some) and is skipped.
 */
import { ErrorCodes, KinhueError } from '../errors.js';
import { outOfRange, parseCssColour, type Rgb } from './css-colour.js';
import { findJsonError, lineColumn } from './json-syntax.js';

export const HINTS_FORMAT = 'kinhue-hints';
export const HINTS_VERSION = 1;

/** One hint, checked: a dot (`points` has one vertex) or a stroke through its vertices. */
export interface HintEntry {
  /** Position in the file's `entries` list, counted from 1 (as messages say it). */
  number: number;
  kind: 'point' | 'stroke';
  /** Vertices in source pixels, `[x, y]`; one for a point. */
  points: Array<[number, number]>;
  /** The colour as written in the file. */
  colour: string;
  /** The colour as sRGB, 0-255. */
  rgb: Rgb;
  /** Radius in source pixels; 0 means the smallest dot the working size allows. */
  radius: number;
  note?: string;
}

/** A hints file after checking. */
export interface Hints {
  file: string;
  width: number;
  height: number;
  entries: HintEntry[];
  /** Entries left with an empty colour (placeholders), not used. */
  placeholders: number;
}

/** The JSON shape as written (what `starterHints` returns and `formatHints` prints). */
export interface HintsJson {
  format: string;
  version: number;
  scan?: string;
  image: { width: number; height: number };
  entries: Array<Record<string, unknown>>;
}

const ENTRY_KEYS = new Set(['x', 'y', 'points', 'colour', 'radius', 'note']);
const TOP_KEYS = new Set(['format', 'version', 'scan', 'image', 'entries']);
const COLOUR_HELP = 'write it as "#rrggbb", "#rgb" or "rgb(r, g, b)" with r, g, b from 0 to 255';
/** The most characters of a value from a hints file that a message repeats. */
const ECHO_LIMIT = 40;
const BYTE_ORDER_MARK = '\uFEFF';

function bad(file: string, message: string, hint: string): KinhueError {
  return new KinhueError(ErrorCodes.BAD_HINTS, message, { file, hint });
}

/**
 * A value from a hints file as a message repeats it: as JSON, cut to a few dozen characters, so a
 * runaway value (a megabyte-long colour) cannot flood the terminal or the record.
 *
 * @example
 *   echo('dark green');      // '"dark green"'
 *   echo('x'.repeat(1000));  // the first 40 characters of '"xxx...', then '... (1002 characters)'
 */
export function echo(value: unknown): string {
  const text = JSON.stringify(value) ?? String(value);
  return text.length <= ECHO_LIMIT ? text : `${text.slice(0, ECHO_LIMIT)}... (${text.length} characters)`;
}

function isNumber(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

/**
 * Parses and checks the text of a hints file. Every problem is a KinhueError (KH_BAD_HINTS) naming the
 * file, the entry (counted from 1) and what to change.
 *
 * @example
 *   const hints = parseHints(await readFile('barn.hints.json', 'utf8'), 'barn.hints.json');
 *   hints.entries[0].rgb; // [47, 93, 58]
 */
export function parseHints(text: string, file: string): Hints {
  // Editors on Windows often save UTF-8 with a byte-order mark, which JSON itself does not allow.
  const body = text.startsWith(BYTE_ORDER_MARK) ? text.slice(1) : text;
  let json: unknown;
  try {
    json = JSON.parse(body);
  } catch (error) {
    const found = findJsonError(body);
    const where = found ? lineColumn(body, found.offset) : undefined;
    throw bad(
      file,
      found && where
        ? `not valid JSON at line ${where.line}, column ${where.column}: ${found.problem}`
        : `not valid JSON (${(error as Error).message.slice(0, 200)})`,
      'fix the JSON syntax (a missing comma or quote is the usual cause), or make a new file with `kinhue hints <scan> --force`',
    );
  }
  if (typeof json !== 'object' || json === null || Array.isArray(json)) {
    throw bad(
      file,
      'a hints file is a JSON object with "format", "version", "image" and "entries"',
      'make a starter file with `kinhue hints <scan>` and edit it',
    );
  }
  const top = json as Record<string, unknown>;
  for (const key of Object.keys(top)) {
    if (!TOP_KEYS.has(key)) throw bad(file, `unknown field ${echo(key)}`, `remove it; the fields are ${[...TOP_KEYS].join(', ')}`);
  }
  if (top.format !== HINTS_FORMAT) {
    throw bad(file, `"format" must be "${HINTS_FORMAT}"`, 'check that this is a kinhue hints file, or make one with `kinhue hints <scan>`');
  }
  if (top.version !== HINTS_VERSION) {
    throw bad(
      file,
      `hints file version ${echo(top.version)} is not one this kinhue reads (it reads version ${HINTS_VERSION})`,
      'use the kinhue version that wrote it, or make a new file with `kinhue hints <scan> --force`',
    );
  }
  const image = top.image as Record<string, unknown> | undefined;
  const width = image?.width;
  const height = image?.height;
  if (!Number.isInteger(width) || !Number.isInteger(height) || (width as number) < 1 || (height as number) < 1) {
    throw bad(
      file,
      '"image" must give the scan\'s size as whole pixels, {"width": W, "height": H}',
      'copy the size from a starter file made by `kinhue hints <scan>`',
    );
  }
  if (!Array.isArray(top.entries)) {
    throw bad(file, '"entries" must be a list (it may be empty)', 'write "entries": [ ... ] with one object per hint');
  }
  const entries: HintEntry[] = [];
  let placeholders = 0;
  top.entries.forEach((raw, i) => {
    const entry = parseEntry(raw, i + 1, width as number, height as number, file);
    if (entry) entries.push(entry);
    else placeholders++;
  });
  return { file, width: width as number, height: height as number, entries, placeholders };
}

/** Checks one entry; returns null for a placeholder (empty colour). */
function parseEntry(raw: unknown, number: number, width: number, height: number, file: string): HintEntry | null {
  const where = `entry ${number}`;
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw)) {
    throw bad(
      file,
      `${where} is not an object`,
      'write each entry as {"x": .., "y": .., "colour": ".."} or {"points": [[x, y], ...], "colour": ".."}',
    );
  }
  const e = raw as Record<string, unknown>;
  for (const key of Object.keys(e)) {
    if (key === 'color') throw bad(file, `${where} has "color"`, 'this format spells it "colour"; rename the field');
    if (!ENTRY_KEYS.has(key))
      throw bad(file, `${where} has an unknown field ${echo(key)}`, `remove it; an entry may have ${[...ENTRY_KEYS].join(', ')}`);
  }
  if (typeof e.colour !== 'string') throw bad(file, `${where} has no "colour"`, `add one: ${COLOUR_HELP}`);
  const note = e.note === undefined ? undefined : String(e.note);
  if (e.colour.trim() === '') return null;
  const rgb = parseCssColour(e.colour);
  if (!rgb) {
    if (outOfRange(e.colour)) {
      throw bad(
        file,
        `${where}: colour ${echo(e.colour)} has a channel out of range`,
        'give each channel from 0 to 255, or from 0% to 100%; kinhue does not clip colours it cannot show',
      );
    }
    throw bad(file, `${where}: colour ${echo(e.colour)} is not a colour kinhue reads`, COLOUR_HELP);
  }

  let radius = 0;
  if (e.radius !== undefined) {
    if (!isNumber(e.radius) || e.radius < 0 || e.radius > Math.max(width, height)) {
      throw bad(
        file,
        `${where}: radius ${echo(e.radius)} is not usable`,
        `give a radius in pixels of the scan, from 0 to ${Math.max(width, height)}`,
      );
    }
    radius = e.radius;
  }

  const hasPoint = e.x !== undefined || e.y !== undefined;
  if (hasPoint === (e.points !== undefined)) {
    throw bad(
      file,
      `${where} needs either "x" and "y" (a point) or "points" (a stroke), not ${hasPoint ? 'both' : 'neither'}`,
      'write {"x": 120, "y": 340, ...} for a point or {"points": [[x, y], [x, y]], ...} for a stroke',
    );
  }
  const inside = (x: unknown, y: unknown, label: string): [number, number] => {
    if (!isNumber(x) || !isNumber(y))
      throw bad(file, `${where}: ${label} needs numeric x and y`, 'write coordinates as numbers, in pixels of the scan');
    if (x < 0 || y < 0 || x >= width || y >= height) {
      throw bad(
        file,
        `${where}: ${label} (${x}, ${y}) lies outside the ${width} x ${height} image`,
        `move it inside: x from 0 to ${width - 1}, y from 0 to ${height - 1} (pixels of the scan, origin top left)`,
      );
    }
    return [x, y];
  };
  let points: Array<[number, number]>;
  if (hasPoint) {
    points = [inside(e.x, e.y, 'the point')];
  } else {
    if (!Array.isArray(e.points) || e.points.length === 0) {
      throw bad(file, `${where}: "points" must be a non-empty list of [x, y] pairs`, 'write "points": [[x1, y1], [x2, y2], ...]');
    }
    points = e.points.map((p, k) => {
      if (!Array.isArray(p) || p.length !== 2)
        throw bad(file, `${where}: point ${k + 1} of the stroke is not an [x, y] pair`, 'write each vertex as [x, y]');
      return inside(p[0], p[1], `point ${k + 1} of the stroke`);
    });
  }
  return { number, kind: hasPoint ? 'point' : 'stroke', points, colour: e.colour, rgb, radius, note };
}

/**
 * A starter hints file for a scan of the given size: placeholder entries (empty colours) showing a point
 * and a stroke, ready to edit.
 *
 * @example
 *   const json = starterHints(3000, 2000, 'barn.jpg');
 *   await writeFile('barn.hints.json', formatHints(json));
 */
export function starterHints(width: number, height: number, scan?: string): HintsJson {
  const r = Math.max(2, Math.round(Math.max(width, height) / 200));
  const at = (fx: number, fy: number): [number, number] => [Math.round((width - 1) * fx), Math.round((height - 1) * fy)];
  const [px, py] = at(0.5, 0.5);
  const [qx, qy] = at(0.25, 0.75);
  return {
    format: HINTS_FORMAT,
    version: HINTS_VERSION,
    ...(scan ? { scan } : {}),
    image: { width, height },
    entries: [
      {
        x: px,
        y: py,
        colour: '',
        radius: r,
        note: 'a point: move x, y (pixels of the scan, origin top left) onto something whose colour you know, then set colour, e.g. "#2f5d3a" or "rgb(47, 93, 58)"; an empty colour is ignored',
      },
      { x: qx, y: qy, colour: '', radius: r, note: 'another point; delete entries you do not need' },
      {
        points: [at(0.6, 0.2), at(0.7, 0.25), at(0.8, 0.2)],
        colour: '',
        radius: r,
        note: 'a stroke: a line through these points, painted with colour; radius is in pixels of the scan',
      },
    ],
  };
}

/** Prints a hints object as JSON with one entry per line, so people can edit it. */
export function formatHints(json: HintsJson): string {
  const value = (v: unknown): string => (Array.isArray(v) ? `[${v.map(value).join(', ')}]` : JSON.stringify(v));
  const entry = (e: Record<string, unknown>): string =>
    `    { ${Object.entries(e)
      .map(([k, v]) => `${JSON.stringify(k)}: ${value(v)}`)
      .join(', ')} }`;
  const head = Object.entries(json)
    .filter(([k]) => k !== 'entries')
    .map(
      ([k, v]) =>
        `  ${JSON.stringify(k)}: ${k === 'image' ? `{ "width": ${json.image.width}, "height": ${json.image.height} }` : JSON.stringify(v)},`,
    );
  const body = json.entries.length ? `[\n${json.entries.map(entry).join(',\n')}\n  ]` : '[]';
  return `{\n${head.join('\n')}\n  "entries": ${body}\n}\n`;
}

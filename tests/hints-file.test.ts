// Hints files: the CSS colour syntax, parsing and its messages, the starter file, and the CLI check.
import { mkdtemp, readFile, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { converter, parse } from 'culori';
import { describe, expect, it } from 'vitest';
import { check } from '../src/cli/commands/hints.js';
import { isKinhueError, KinhueError } from '../src/errors.js';
import {
  formatHints,
  hintLch,
  hintsCandidates,
  outOfRange,
  parseCssColour,
  parseHints,
  prepareGuidance,
  rasteriseHints,
  starterHints,
  writeStarterHints,
} from '../src/hints/index.js';
import { findJsonError } from '../src/hints/json-syntax.js';
import { random } from './helpers/random.js';

function thrown(fn: () => unknown): KinhueError {
  try {
    fn();
  } catch (error) {
    if (isKinhueError(error)) return error;
    throw error;
  }
  throw new Error('expected a KinhueError');
}

const file = 'album/barn.hints.json';
const doc = (entries: unknown[], extra: Record<string, unknown> = {}) =>
  JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width: 300, height: 200 }, entries, ...extra });

describe('CSS colours', () => {
  // Reference: culori's CSS parser (an independent npm library), channels 0-1.
  const cases = [
    '#2f5d3a',
    '#ABC',
    '#000',
    '#ffffff',
    'rgb(180, 40, 30)',
    'rgb(10 20 30)',
    'rgb(10%, 20%, 30%)',
    ' rgb( 0 , 255 , 127.5 ) ',
  ];
  it.each(cases)('%s reads as culori reads it', (text) => {
    const ours = parseCssColour(text)!;
    const theirs = parse(text.trim()) as { r: number; g: number; b: number };
    expect(ours).not.toBeNull();
    ours.forEach((v, k) => expect(v / 255).toBeCloseTo([theirs.r, theirs.g, theirs.b][k]!, 9));
  });
  it.each(['green', '#12345', '#1234', 'rgb(1, 2)', 'rgb(1%, 2, 3)', 'hsl(120, 50%, 50%)', 'rgb(a, b, c)', ''])('%s is refused', (text) => {
    expect(parseCssColour(text)).toBeNull();
    expect(outOfRange(text)).toBe(false);
  });
  // CSS would clamp these (CSS Color 4, 5.1); a hints file states a known colour, so they are mistakes.
  it.each(['rgb(300, 0, 0)', 'rgb(120%, 0%, 0%)', 'rgb(-1 0 0)', 'rgb(0, 255.5, 0)'])('%s is out of range, not clamped', (text) => {
    expect(parseCssColour(text)).toBeNull();
    expect(outOfRange(text)).toBe(true);
  });
  it('reads the edges of the range', () => {
    expect(parseCssColour('rgb(255, 0, 0)')).toEqual([255, 0, 0]);
    expect(parseCssColour('rgb(100%, 0%, 0%)')).toEqual([255, 0, 0]);
  });
  it('converts to CIELAB as culori does (lab65: CIE 1976 L*a*b*, D65)', () => {
    // Tolerance 0.01: the two libraries' sRGB matrices and white points differ in the fourth decimal.
    for (const hex of ['#2f5d3a', '#c0504a', '#3d8fbf', '#ff0000']) {
      const ours = hintLch(parseCssColour(hex)!);
      const theirs = converter('lab65')(hex)!;
      expect(Math.abs(ours.L - theirs.l)).toBeLessThan(0.01);
      expect(Math.abs(ours.chroma - Math.hypot(theirs.a, theirs.b))).toBeLessThan(0.01);
      expect(Math.abs(ours.hue - Math.atan2(theirs.b, theirs.a))).toBeLessThan(1e-3);
    }
  });
});

describe('parseHints', () => {
  it('reads points and strokes with their colours, radii and notes', () => {
    const hints = parseHints(
      doc([
        { x: 10, y: 20, colour: '#2f5d3a', radius: 6, note: 'coat' },
        {
          points: [
            [0, 0],
            [299.5, 199.5],
          ],
          colour: 'rgb(150, 38, 30)',
        },
        { x: 1, y: 1, colour: '' },
      ]),
      file,
    );
    expect(hints.width).toBe(300);
    expect(hints.entries).toHaveLength(2);
    expect(hints.placeholders).toBe(1);
    expect(hints.entries[0]).toMatchObject({ number: 1, kind: 'point', points: [[10, 20]], rgb: [47, 93, 58], radius: 6, note: 'coat' });
    expect(hints.entries[1]).toMatchObject({ number: 2, kind: 'stroke', radius: 0, rgb: [150, 38, 30] });
  });

  it('names the file and the line of a JSON syntax error', () => {
    const error = thrown(() => parseHints('{\n  "format": "kinhue-hints",\n  "version": 1\n  "image": {}\n}', file));
    expect(error.code).toBe('KH_BAD_HINTS');
    expect(error.file).toBe(file);
    expect(error.message).toMatch(/not valid JSON at line 4/);
    expect(error.describe()).toContain(file);
  });

  it('gives line and column where Node names no position, and does not repeat the text', () => {
    const cases: [string, RegExp][] = [
      ['{\n  "format": "kinhue-hints",\n  "version": one\n}', /at line 3, column 14: expected a value, found "o"/],
      ['{\n  "entries": [\n    {"x": 1},\n  ]\n}', /at line 4, column 3: expected a value, found "\]"/],
      ['{\n  "format": "kinhue-hints\n}', /at line 2, column 26: a control character/],
      ['{"format": "kinhue-hints"', /at line 1, column 26: expected "," or "}", found the end of the text/],
      ['{"format": "kinhue-hints"} x', /at line 1, column 28: "x" after the end of the JSON value/],
    ];
    for (const [text, message] of cases) {
      const error = thrown(() => parseHints(text, file));
      expect(error.code).toBe('KH_BAD_HINTS');
      expect(error.message).toMatch(message);
      expect(error.message).not.toContain('kinhue-hints');
    }
  });

  it('finds a syntax error exactly where JSON.parse fails, and none where it succeeds', () => {
    // Reference: Node's own JSON.parse, for validity and, where its message gives one, the position.
    const valid = ['{}', '[]', ' {"a": [1, -2.5e3, true, false, null, "\\u00e9\\n"]} ', '"x"', '0', '[[[[]]]]', '{"a":{"b":{}}}'];
    const invalid = [
      '',
      '{',
      '{"a" 1}',
      '{"a": 01}',
      '[1 2]',
      '{"a": tru}',
      '"\\x"',
      '[-]',
      '{,}',
      '{"a": 1}}',
      "{'a': 1}",
      '[1,]',
      '1.',
      '[1e]',
      '-x',
      '"a\tb"',
    ];
    for (const text of valid) expect(findJsonError(text), text).toBeNull();
    let positions = 0;
    for (const text of invalid) {
      let message = '';
      try {
        JSON.parse(text);
      } catch (error) {
        message = (error as Error).message;
      }
      expect(message, text).not.toBe('');
      const found = findJsonError(text);
      expect(found, text).not.toBeNull();
      const position = /at position (\d+)/.exec(message)?.[1];
      if (position !== undefined) {
        expect(found!.offset, text).toBe(Number(position));
        positions++;
      }
    }
    expect(positions).toBeGreaterThan(4);
    expect(findJsonError('{"a": 1,}')).toEqual({ offset: 8, problem: 'expected a property name in double quotes, found "}"' });
    expect(findJsonError(`${'['.repeat(100_000)}${']'.repeat(100_000)}`)).toBeNull();
  });

  it('accepts a UTF-8 byte-order mark, as Windows editors write it', () => {
    const hints = parseHints(`\uFEFF${doc([{ x: 10, y: 20, colour: '#2f5d3a' }])}`, file);
    expect(hints.entries).toHaveLength(1);
  });

  it('refuses an rgb() colour out of range instead of clamping it', () => {
    const error = thrown(() =>
      parseHints(
        doc([
          { x: 1, y: 1, colour: 'rgb(300, 0, 0)' },
          { x: 1, y: 1, colour: 'rgb(120%, 0%, 0%)' },
        ]),
        file,
      ),
    );
    expect(error.message).toBe('entry 1: colour "rgb(300, 0, 0)" has a channel out of range');
    expect(error.hint).toMatch(/from 0 to 255, or from 0% to 100%/);
    expect(thrown(() => parseHints(doc([{ x: 1, y: 1, colour: 'rgb(120%, 0%, 0%)' }]), file)).message).toContain('out of range');
  });

  it('repeats at most a few dozen characters of a value from the file', () => {
    const long = 'x'.repeat(1_000_000);
    for (const entry of [
      { x: 1, y: 1, colour: long },
      { x: 1, y: 1, colour: '#fff', [long]: 1 },
      { x: 1, y: 1, colour: '#fff', radius: long },
    ]) {
      const error = thrown(() => parseHints(doc([entry]), file));
      expect(error.describe().length).toBeLessThan(400);
      expect(error.message).toContain('(1000002 characters)');
    }
    expect(thrown(() => parseHints(doc([], { version: long }), file)).message).toContain('(1000002 characters)');
  });

  it('names the entry whose point lies outside the image, and says what to change', () => {
    const error = thrown(() =>
      parseHints(
        doc([
          { x: 5, y: 5, colour: '#fff' },
          { x: 300, y: 10, colour: '#fff' },
        ]),
        file,
      ),
    );
    expect(error.code).toBe('KH_BAD_HINTS');
    expect(error.describe()).toContain(file);
    expect(error.message).toContain('entry 2');
    expect(error.message).toContain('outside the 300 x 200 image');
    expect(error.hint).toContain('x from 0 to 299');
  });

  it('names the stroke vertex outside the image', () => {
    const error = thrown(() =>
      parseHints(
        doc([
          {
            points: [
              [1, 1],
              [2, -3],
            ],
            colour: '#fff',
          },
        ]),
        file,
      ),
    );
    expect(error.message).toContain('entry 1: point 2 of the stroke (2, -3)');
  });

  it('names the entry with an unknown colour syntax and lists the accepted ones', () => {
    const error = thrown(() =>
      parseHints(
        doc([
          { x: 1, y: 1, colour: '#123' },
          { x: 1, y: 1, colour: 'dark green' },
        ]),
        file,
      ),
    );
    expect(error.message).toBe('entry 2: colour "dark green" is not a colour kinhue reads');
    expect(error.hint).toContain('rgb(r, g, b)');
  });

  it('refuses the spelling "color", unknown fields, both point and stroke, a bad radius, a wrong version', () => {
    expect(thrown(() => parseHints(doc([{ x: 1, y: 1, color: '#fff' }]), file)).hint).toContain('"colour"');
    expect(thrown(() => parseHints(doc([{ x: 1, y: 1, colour: '#fff', size: 3 }]), file)).message).toContain('unknown field "size"');
    expect(thrown(() => parseHints(doc([{ x: 1, y: 1, points: [[1, 1]], colour: '#fff' }]), file)).message).toContain('not both');
    expect(thrown(() => parseHints(doc([{ x: 1, y: 1, colour: '#fff', radius: -2 }]), file)).message).toContain('radius -2');
    expect(thrown(() => parseHints(doc([], { version: 2 }), file)).message).toContain('version 2');
    expect(thrown(() => parseHints('[]', file)).code).toBe('KH_BAD_HINTS');
  });
});

describe('drawing entries onto the working grid', () => {
  it('gives each cell the colour of the last entry covering it, with 2,000 entries at the largest radius', () => {
    // Reference: each cell's centre tested against every entry in file order, the last one within its radius winning.
    const next = random(5);
    const W = 400,
      H = 266,
      w = 200,
      h = 133;
    const colours = ['#c0504a', '#3d8fbf', '#2f5d3a', '#8a4a26'];
    const entries = Array.from({ length: 2000 }, (_, k) =>
      k % 2
        ? { x: Math.floor(next() * W), y: Math.floor(next() * H), colour: colours[k % 4], radius: k > 1990 ? 400 : 5 + next() * 40 }
        : {
            points: [
              [next() * (W - 1), next() * (H - 1)],
              [next() * (W - 1), next() * (H - 1)],
            ],
            colour: colours[k % 4],
            radius: 3 + next() * 30,
          },
    );
    const hints = parseHints(JSON.stringify({ format: 'kinhue-hints', version: 1, image: { width: W, height: H }, entries }), file);
    const L = Float32Array.from({ length: w * h }, () => 30 + next() * 40);
    const drawn = rasteriseHints(hints, L, w, h, W, H);
    const s = w / W;
    const within = (e: (typeof hints.entries)[number], u: number, v: number): boolean => {
      const pts = e.points.map(([x, y]) => [(x + 0.5) * s, (y + 0.5) * s] as const);
      const [p, q] = [pts[0]!, pts.at(-1)!];
      const dx = q[0] - p[0],
        dy = q[1] - p[1],
        len2 = dx * dx + dy * dy;
      const t = len2 > 0 ? Math.max(0, Math.min(1, ((u - p[0]) * dx + (v - p[1]) * dy) / len2)) : 0;
      return Math.hypot(u - p[0] - t * dx, v - p[1] - t * dy) <= e.radius * s;
    };
    let checked = 0;
    for (let i = 0; i < w * h; i += 97) {
      const u = (i % w) + 0.5,
        v = Math.floor(i / w) + 0.5;
      const last = [...hints.entries].reverse().find((e) => within(e, u, v));
      expect(drawn.constraints.fixed[i]).toBe(last ? 1 : 0);
      if (!last) continue;
      const hue = hintLch(last.rgb).hue;
      expect(Math.abs(Math.atan2(drawn.constraints.b[i]!, drawn.constraints.a[i]!) - hue)).toBeLessThan(1e-4);
      checked++;
    }
    expect(checked).toBeGreaterThan(200);
    expect(drawn.pixels).toBe(w * h); // the last entries cover the whole grid
  });
});

describe('starter hints', () => {
  it('holds the image size and placeholder entries that parse as no hints', () => {
    const json = starterHints(1600, 900, 'pony.jpg');
    const hints = parseHints(formatHints(json), 'pony.hints.json');
    expect([hints.width, hints.height]).toEqual([1600, 900]);
    expect(hints.entries).toHaveLength(0);
    expect(hints.placeholders).toBe(3);
  });

  it('is written beside the scan, atomically, and never replaced without force', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-hints-'));
    const scan = join(dir, 'pony.jpg');
    await writeFile(scan, await readFile('demo-photos/scans/wrenfold-04-hill-pony.jpg'));
    const first = await writeStarterHints(scan);
    expect(first.path).toBe(join(dir, 'pony.hints.json'));
    expect(parseHints(await readFile(first.path, 'utf8'), first.path).width).toBe(1600);
    await writeFile(first.path, doc([]));
    await expect(writeStarterHints(scan)).rejects.toMatchObject({ code: 'KH_WRITE_FAILED', file: first.path });
    expect(await readFile(first.path, 'utf8')).toBe(doc([]));
    await writeStarterHints(scan, { force: true });
    expect(JSON.parse(await readFile(first.path, 'utf8')).entries).toHaveLength(3);
  });

  it('are looked for in the hints folder, then beside the scan', () => {
    expect(hintsCandidates('scans/1952/barn.jpg', 'hints', '1952/barn.jpg')).toEqual([
      join('hints', '1952', 'barn.hints.json'),
      join('hints', 'barn.hints.json'),
      join('scans', '1952', 'barn.hints.json'),
    ]);
  });

  it('a bad hints file is recorded as ignored, with its message, and nothing is applied', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-hints-'));
    await writeFile(join(dir, 'barn.hints.json'), doc([{ x: 400, y: 1, colour: '#fff' }]));
    const guidance = await prepareGuidance(join(dir, 'barn.jpg'), 300, 200);
    expect(guidance.guides).toEqual([]);
    expect(guidance.record.hints).toMatchObject({ used: false });
    expect(guidance.record.hints!.ignored).toContain('entry 1');
  });

  it('a hints file made for another image size is refused unless the aspect ratio matches', async () => {
    const dir = await mkdtemp(join(tmpdir(), 'kinhue-hints-'));
    await writeFile(join(dir, 'barn.hints.json'), doc([{ x: 10, y: 10, colour: '#fff' }]));
    expect((await prepareGuidance(join(dir, 'barn.jpg'), 600, 400)).record.hints).toMatchObject({ used: true, entries: 1 });
    const other = await prepareGuidance(join(dir, 'barn.jpg'), 400, 400);
    expect(other.record.hints!.ignored).toContain('made for a 300 x 200 image but the scan is 400 x 400');
  });
});

describe('hints command check()', () => {
  it('accepts a scan, with or without --out', () => {
    expect(check({ scan: 'a.jpg' })).toBe(true);
    expect(check({ scan: 'a.jpg', out: 'b.hints.json', force: true })).toBe(true);
  });
  it('refuses a missing scan or an --out that is not JSON, with an example', () => {
    expect(() => check({})).toThrow(/Example usage: kinhue hints/);
    expect(() => check({ scan: 'a.jpg', out: 'b.txt' })).toThrow(/\.json/);
  });
});

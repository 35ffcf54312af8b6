import { mkdir, mkdtemp, readFile, rm, symlink, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  appendManifest,
  loadManifest,
  planOutputs,
  readManifest,
  settingsKey,
  terminateManifest,
  type RestoreSettings,
} from '../src/batch/index.js';
import { UsageError } from '../src/errors.js';
import { discoverInputs, fitName, hostLabel, NAME_MAX_BYTES, tempPathFor, temporaryOwner } from '../src/files/index.js';

let root: string;
/** Discovery as restore runs it, writing into `outDir`. */
const at = (outDir: string) => ({ outDir, example: 'Example usage: kinhue restore scans/ --out restored/' });

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-plan-'));
  const files = [
    'scans/b.jpg',
    'scans/a.JPG',
    'scans/a.png',
    'scans/sub/c.tif',
    'scans/notes.txt',
    'scans/.hidden.jpg',
    'scans/restored/old.png',
    'other/b.jpg',
  ];
  for (const f of files) {
    await mkdir(join(root, f, '..'), { recursive: true });
    await writeFile(join(root, f), 'x');
  }
});

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('discoverInputs', () => {
  it('finds images in folders recursively, sorted, without the output folder inside an input or non-images', async () => {
    const d = await discoverInputs([join(root, 'scans')], at(join(root, 'scans', 'restored')));
    expect(d.files.map((f) => f.rel)).toEqual(['a.JPG', 'a.png', 'b.jpg', 'sub/c.tif']);
    expect(d.base).toBe(join(root, 'scans'));
    expect(d.notes.join(' ')).toMatch(/output folder/);
  });

  it('mirrors from the common base of several inputs, and takes globs and files', async () => {
    const d = await discoverInputs([join(root, 'other', 'b.jpg'), `${root}/scans/*.jpg`], at(join(root, 'out')));
    expect(d.files.map((f) => f.rel)).toEqual(['other/b.jpg', 'scans/a.JPG', 'scans/b.jpg']);
  });

  it('lists the same file once when it is named twice', async () => {
    const d = await discoverInputs([join(root, 'scans', 'b.jpg'), join(root, 'scans')], at(join(root, 'out')));
    expect(d.files.filter((f) => f.rel === 'b.jpg')).toHaveLength(1);
  });

  it('finds GIF and AVIF scans by folder and by glob, as it reads them', async () => {
    const folder = join(root, 'formats');
    await mkdir(folder, { recursive: true });
    const grey = sharp({ create: { width: 16, height: 16, channels: 3, background: '#777777' } });
    await grey.clone().gif().toFile(join(folder, 'a.gif'));
    await grey.clone().avif().toFile(join(folder, 'b.AVIF'));
    expect((await discoverInputs([folder], at(join(root, 'out')))).files.map((f) => f.rel)).toEqual(['a.gif', 'b.AVIF']);
    expect((await discoverInputs([`${folder}/*`], at(join(root, 'out')))).files.map((f) => f.rel)).toEqual(['a.gif', 'b.AVIF']);
  });

  it('follows links to folders but searches each real folder once, keeping the direct path', async () => {
    const top = join(root, 'looped');
    await mkdir(join(top, 'sub'), { recursive: true });
    await writeFile(join(top, 'a.jpg'), 'x');
    await writeFile(join(top, 'sub', 'b.jpg'), 'x');
    await symlink('..', join(top, 'sub', 'back')); // a loop back to the top
    await symlink(join(top, 'sub'), join(top, 'again')); // the same folder twice
    await symlink('a.jpg', join(top, 'a-link.jpg')); // the same file twice
    const d = await discoverInputs([top], at(join(root, 'out')));
    expect(d.files.map((f) => f.rel)).toEqual(['a.jpg', 'sub/b.jpg']);
    expect(d.problems).toEqual([]);
  });

  it('reports broken links and link loops, named or found in a folder, and goes on', async () => {
    const top = join(root, 'links');
    await mkdir(top, { recursive: true });
    await writeFile(join(top, 'good.jpg'), 'x');
    await symlink(join(top, 'gone.jpg'), join(top, 'broken.jpg'));
    await symlink(join(top, 'loop-b.jpg'), join(top, 'loop-a.jpg'));
    await symlink(join(top, 'loop-a.jpg'), join(top, 'loop-b.jpg'));
    const inFolder = await discoverInputs([top], at(join(root, 'out')));
    expect(inFolder.files.map((f) => f.rel)).toEqual(['good.jpg']);
    expect(inFolder.problems.map((p) => [p.rel, p.code])).toEqual([
      ['broken.jpg', 'KH_UNREADABLE'],
      ['loop-a.jpg', 'KH_UNREADABLE'],
      ['loop-b.jpg', 'KH_UNREADABLE'],
    ]);
    expect(inFolder.problems[0]!.message).toMatch(/does not exist/);
    expect(inFolder.problems[1]!.message).toMatch(/loop/);
    const named = await discoverInputs([join(top, 'good.jpg'), join(top, 'broken.jpg'), join(top, 'loop-a.jpg')], at(join(root, 'out')));
    expect(named.files.map((f) => f.rel)).toEqual(['good.jpg']);
    expect(named.problems.map((p) => p.rel)).toEqual(['broken.jpg', 'loop-a.jpg']);
    for (const p of named.problems) expect(p.hint).toMatch(/fix or remove the link/);
  });

  it('refuses an output folder that is the input folder through a link, either way round', async () => {
    const scans = join(root, 'same');
    await mkdir(scans, { recursive: true });
    await writeFile(join(scans, 'x.jpg'), 'x');
    await symlink(scans, join(root, 'same-link'));
    await expect(discoverInputs([scans], at(join(root, 'same-link')))).rejects.toThrow(/is the output folder/);
    await expect(discoverInputs([join(root, 'same-link', 'x.jpg')], at(scans))).rejects.toThrow(/lies in the output folder/);
    await expect(discoverInputs([join(root, 'same-link')], at(join(scans, '.')))).rejects.toBeInstanceOf(UsageError);
  });

  it('refuses an input folder inside the output folder, a missing path, and finding nothing', async () => {
    await expect(discoverInputs([join(root, 'scans', 'restored')], at(join(root, 'scans')))).rejects.toBeInstanceOf(UsageError);
    await expect(discoverInputs([join(root, 'nope')], at(join(root, 'out')))).rejects.toThrow(/no such file or folder/);
    await expect(discoverInputs([`${root}/scans/*.gif`], at(join(root, 'out')))).rejects.toThrow(/no image files found/);
  });
});

describe('planOutputs', () => {
  const files = [
    { path: '/s/a.JPG', rel: 'a.JPG' },
    { path: '/s/a.png', rel: 'a.png' },
    { path: '/s/b.tif', rel: 'sub/b.tif' },
    { path: '/s/c.gif', rel: 'c.gif' },
  ];

  it('keeps each source format and name, and gives sources sharing a name their extension', () => {
    const p = planOutputs(files, 'same');
    expect(p.map((o) => o.image)).toEqual(['a_jpg.JPG', 'a_png.png', 'sub/b.tif', 'c.png']);
    expect(p.map((o) => o.format)).toEqual(['jpeg', 'png', 'tiff', 'png']);
    expect(p[2]).toMatchObject({ confidence: 'sub/b.confidence.png', record: 'sub/b.kinhue.json' });
  });

  it('shortens names too long for the file system the same way every time', () => {
    const long = `${'é'.repeat(121)}.tif`; // 246 bytes: its stem with .confidence.png would be 257
    const [planned] = planOutputs([{ path: `/s/${long}`, rel: `sub/${long}` }], 'same');
    for (const name of [planned!.image, planned!.confidence, planned!.record]) {
      expect(Buffer.byteLength(name.slice('sub/'.length)), name).toBeLessThanOrEqual(NAME_MAX_BYTES);
      expect(name.startsWith('sub/éé')).toBe(true);
    }
    expect(planOutputs([{ path: `/s/${long}`, rel: `sub/${long}` }], 'same')).toEqual([planned]);
    const short = planOutputs([{ path: '/s/a.tif', rel: 'a.tif' }], 'same')[0]!;
    expect(short.confidence).toBe('a.confidence.png');
  });

  it('never gives two sources one output name, whatever the format', () => {
    for (const format of ['png', 'jpeg', 'tiff', 'webp'] as const) {
      const names = planOutputs([...files, { path: '/s/a_jpg.png', rel: 'a_jpg.png' }], format).flatMap((o) => [
        o.image,
        o.confidence,
        o.record,
      ]);
      expect(new Set(names.map((n) => n.toLowerCase())).size).toBe(names.length);
    }
  });
});

describe('manifest', () => {
  const settings: RestoreSettings = {
    model: 'm',
    weightsSha256: 'abc',
    workSize: 512,
    decoding: 'least-ciede2000',
    temperature: 0.38,
    format: 'same',
    quality: null,
    confidence: true,
  };

  it('keys settings stably and differently when a setting changes', () => {
    expect(settingsKey(settings)).toBe(settingsKey({ ...settings }));
    expect(settingsKey({ ...settings, temperature: 0.5 })).not.toBe(settingsKey(settings));
    expect(settingsKey({ ...settings, vividness: 0.2 })).not.toBe(settingsKey(settings));
  });

  it('ends a torn last line, notes it, and never loses a record glued onto one', async () => {
    const path = join(root, 'torn.jsonl');
    const base = { time: 't', source: '/s/a.png', settings: 'k' };
    await appendManifest(path, { ...base, output: 'a.png', status: 'done', sha256: 'h' });
    await writeFile(path, '{"time":"t","status":"do', { flag: 'a' }); // a run killed while appending
    const before = await loadManifest(path);
    expect(before.torn).toBe(true);
    expect(before.notes).toEqual([expect.stringMatching(/torn\.jsonl line 2 was cut short/)]);
    await terminateManifest(path);
    await appendManifest(path, { ...base, output: 'b.png', status: 'done', sha256: 'i' });
    const after = await loadManifest(path);
    expect(after.torn).toBe(false);
    expect([...after.records.keys()]).toEqual(['a.png', 'b.png']);

    // What an unrepaired manifest looks like after the next run: its record glued onto the torn line.
    const glued = join(root, 'glued.jsonl');
    await writeFile(glued, `{"time":"t","status":"do${JSON.stringify({ ...base, output: 'c.png', status: 'done' })}\nnot json\n`);
    const read = await loadManifest(glued);
    expect(read.records.get('c.png')?.status).toBe('done');
    expect(read.notes).toEqual([
      expect.stringMatching(/line 1 starts with a record cut short/),
      expect.stringMatching(/line 2 is not a record/),
    ]);
    expect((await readFile(glued, 'utf8')).endsWith('\n')).toBe(true);
  });

  it('keeps the last record per output and ignores a torn line', async () => {
    const path = join(root, 'm.jsonl');
    const base = { time: 't', source: '/s/a.png', output: 'a.png', settings: 'k' };
    await appendManifest(path, { ...base, status: 'failed', error: { code: 'KH_CORRUPT_IMAGE', message: 'x' } });
    await appendManifest(path, { ...base, status: 'done', sha256: 'h' });
    await writeFile(path, '{"time":"t","status":"do', { flag: 'a' });
    const last = await readManifest(path);
    expect(last.get('a.png')).toMatchObject({ status: 'done', sha256: 'h' });
    expect((await readManifest(join(root, 'missing.jsonl'))).size).toBe(0);
  });
});

describe('temporary names', () => {
  it('stay within the file-system limit, carry the process id, and cut only between characters', () => {
    const name = `${'ü'.repeat(120)}.confidence.png`; // 255 bytes already
    const temp = tempPathFor(join('/out', name));
    const base = temp.slice('/out/'.length);
    expect(Buffer.byteLength(base)).toBeLessThanOrEqual(NAME_MAX_BYTES);
    expect(temporaryOwner(base)).toEqual({ pid: process.pid, host: hostLabel() });
    expect(base).not.toContain('\uFFFD');
    expect(fitName(name, 100)).toBe(fitName(name, 100));
    expect(fitName(name, 100)).not.toBe(fitName(`${name}x`, 100));
    expect(fitName('short.png', 100)).toBe('short.png');
    expect(temporaryOwner('notes.tmp')).toBeUndefined();
    expect(temporaryOwner('a.png.123.0badf00d.tmp')).toEqual({ pid: 123 }); // named before the machine was added
    expect(temporaryOwner('a.png.123@node-07.0badf00d.tmp')).toEqual({ pid: 123, host: 'node-07' });
  });
});

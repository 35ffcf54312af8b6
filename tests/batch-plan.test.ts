import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { appendManifest, discoverInputs, planOutputs, readManifest, settingsKey, type RestoreSettings } from '../src/batch/index.js';
import { UsageError } from '../src/errors.js';

let root: string;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-plan-'));
  const files = ['scans/b.jpg', 'scans/a.JPG', 'scans/a.png', 'scans/sub/c.tif', 'scans/notes.txt', 'scans/.hidden.jpg',
    'scans/restored/old.png', 'other/b.jpg'];
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
    const d = await discoverInputs([join(root, 'scans')], join(root, 'scans', 'restored'));
    expect(d.files.map((f) => f.rel)).toEqual(['a.JPG', 'a.png', 'b.jpg', 'sub/c.tif']);
    expect(d.base).toBe(join(root, 'scans'));
    expect(d.notes.join(' ')).toMatch(/output folder/);
  });

  it('mirrors from the common base of several inputs, and takes globs and files', async () => {
    const d = await discoverInputs([join(root, 'other', 'b.jpg'), `${root}/scans/*.jpg`], join(root, 'out'));
    expect(d.files.map((f) => f.rel)).toEqual(['other/b.jpg', 'scans/a.JPG', 'scans/b.jpg']);
  });

  it('lists the same file once when it is named twice', async () => {
    const d = await discoverInputs([join(root, 'scans', 'b.jpg'), join(root, 'scans')], join(root, 'out'));
    expect(d.files.filter((f) => f.rel === 'b.jpg')).toHaveLength(1);
  });

  it('refuses an input folder inside the output folder, a missing path, and finding nothing', async () => {
    await expect(discoverInputs([join(root, 'scans', 'restored')], join(root, 'scans'))).rejects.toBeInstanceOf(UsageError);
    await expect(discoverInputs([join(root, 'nope')], join(root, 'out'))).rejects.toThrow(/no such file or folder/);
    await expect(discoverInputs([`${root}/scans/*.gif`], join(root, 'out'))).rejects.toThrow(/no image files found/);
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

  it('never gives two sources one output name, whatever the format', () => {
    for (const format of ['png', 'jpeg', 'tiff', 'webp'] as const) {
      const names = planOutputs([...files, { path: '/s/a_jpg.png', rel: 'a_jpg.png' }], format).flatMap((o) => [o.image, o.confidence, o.record]);
      expect(new Set(names.map((n) => n.toLowerCase())).size).toBe(names.length);
    }
  });
});

describe('manifest', () => {
  const settings: RestoreSettings = {
    model: 'm', weightsSha256: 'abc', workSize: 512, decoding: 'least-ciede2000', temperature: 0.38, format: 'same', quality: null, confidence: true,
  };

  it('keys settings stably and differently when a setting changes', () => {
    expect(settingsKey(settings)).toBe(settingsKey({ ...settings }));
    expect(settingsKey({ ...settings, temperature: 0.5 })).not.toBe(settingsKey(settings));
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

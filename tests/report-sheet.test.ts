import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { cp, mkdir, mkdtemp, readFile, readdir, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { restore, type RestoreSummary } from '../src/batch/index.js';
import { createNetwork, DEFAULT_MODEL_DIR, initBackend, saveModel } from '../src/model/index.js';
import { makeSheet, relativeUrl } from '../src/report/index.js';
import { launchChromium } from './helpers/chromium.js';

// The review sheet of a real restore run of the demo scans (plus one file that is not an image),
// opened in a real browser: the headless Chromium of the npm package @sparticuz/chromium, driven by playwright-core.

const REPO = join(__dirname, '..');
const SCANS = join(REPO, 'demo-photos', 'scans');
const SHOTS = join(REPO, 'tests', 'out');
const BIN = join(REPO, 'bin', 'kinhue.js');

let root: string;
let profile: string;
let run: string;
let summary: RestoreSummary;
let context: BrowserContext;
let page: Page;
let sheetPath: string;
let modelNote: string;
const requests: string[] = [];
const problems: string[] = [];

/** The shipped model when it is there; until it is trained, a fresh (untrained) network. */
async function modelFolder(): Promise<string> {
  if (existsSync(join(DEFAULT_MODEL_DIR, 'kinhue-model.json'))) {
    modelNote = 'shipped model';
    return DEFAULT_MODEL_DIR;
  }
  modelNote = 'untrained network (the shipped model is not there yet)';
  await initBackend();
  const dir = join(root, 'model');
  const network = createNetwork({ width: 4, seed: 2 });
  await saveModel(network, dir, { name: 'untrained-for-tests' });
  network.dispose();
  return dir;
}

interface Card {
  name: string;
  status: string;
  confidence: string;
  hidden: boolean;
}

async function cards(): Promise<Card[]> {
  return page.$$eval('article.photo', (els) =>
    els.map((el) => ({
      name: el.getAttribute('data-name') ?? '',
      status: el.getAttribute('data-status') ?? '',
      confidence: el.getAttribute('data-confidence') ?? '',
      hidden: (el as HTMLElement).hidden,
    })),
  );
}

beforeAll(async () => {
  if (!existsSync(SCANS)) throw new Error(`${SCANS} is missing: the demo album is part of the repository`);
  root = await mkdtemp(join(tmpdir(), 'kinhue-sheet-'));
  const input = join(root, 'scans');
  await cp(SCANS, input, { recursive: true });
  await mkdir(join(input, 'loose'), { recursive: true });
  await writeFile(join(input, 'loose', 'shopping-list.jpg'), 'eggs, flour, lamp oil\n');
  run = join(root, 'restored');
  summary = await restore({ inputs: [input], out: run, model: await modelFolder(), jobs: 2 });
  sheetPath = (await makeSheet({ run })).output;

  await mkdir(SHOTS, { recursive: true });
  // A fresh profile for every run: nothing remembered from earlier runs or other programs.
  profile = await mkdtemp(join(tmpdir(), 'kinhue-chromium-'));
  ({ context } = await launchChromium(profile));
  page = context.pages()[0] ?? (await context.newPage());
  page.on('request', (r) => requests.push(r.url()));
  page.on('pageerror', (e) => problems.push(String(e)));
  page.on('console', (m) => {
    if (m.type() === 'error' || m.type() === 'warning') problems.push(m.text());
  });
  await page.goto(pathToFileURL(sheetPath).href, { waitUntil: 'load' });
  // Decode every picture (those below the fold too) so checks and screenshots see them all.
  await page.evaluate(() => Promise.all(Array.from(document.images).map((i) => i.decode().catch(() => undefined))));
}, 180_000);

afterAll(async () => {
  await context?.close();
  if (profile) await rm(profile, { recursive: true, force: true });
  if (root) await rm(root, { recursive: true, force: true });
});

describe('review sheet in Chromium', () => {
  it('shows every restored photo and the failed file', async () => {
    const all = await cards();
    const scans = (await readdir(SCANS, { recursive: true })).filter((f) => /\.(jpe?g|png|tiff?|webp)$/i.test(f));
    expect(summary.done, `restore with the ${modelNote}`).toBe(scans.length);
    expect(all.filter((c) => c.status === 'done')).toHaveLength(scans.length);
    expect(all.filter((c) => c.status === 'failed').map((c) => c.name)).toEqual(['loose/shopping-list.jpg']);
  });

  it('loads every image from the folder, with no network and no errors', async () => {
    const images = await page.$$eval('img', (els) =>
      els.map((i) => ({ src: i.getAttribute('src') ?? '', complete: i.complete, width: i.naturalWidth })),
    );
    expect(images.length).toBe(5 * summary.done); // comparison (2) + scan, result, confidence map
    for (const img of images) {
      expect(img.complete, img.src).toBe(true);
      expect(img.width, img.src).toBeGreaterThan(0);
      expect(img.src.startsWith('data:') || !/^[a-z]+:/i.test(img.src), img.src).toBe(true); // relative links only
    }
    expect(requests.filter((u) => !u.startsWith('file:') && !u.startsWith('data:'))).toEqual([]);
    expect(problems).toEqual([]);
  });

  it('sorts least confident first, and re-sorts on request', async () => {
    const byConfidence = (await cards()).filter((c) => c.status === 'done').map((c) => Number(c.confidence));
    expect(byConfidence).toEqual([...byConfidence].sort((x, y) => x - y));
    expect((await cards()).at(-1)!.status).toBe('failed');

    await page.selectOption('#sort', 'name');
    const names = (await cards()).map((c) => c.name);
    expect(names).toEqual([...names].sort());

    await page.selectOption('#sort', 'confidence-desc');
    const desc = (await cards()).filter((c) => c.status === 'done').map((c) => Number(c.confidence));
    expect(desc).toEqual([...desc].sort((x, y) => y - x));

    await page.selectOption('#sort', 'failed-first');
    expect((await cards())[0]!.status).toBe('failed');
    await page.selectOption('#sort', 'confidence-asc');
  });

  it('filters to the failed files and shows their messages', async () => {
    await page.selectOption('#show', 'failed');
    const visible = (await cards()).filter((c) => !c.hidden);
    expect(visible.map((c) => c.name)).toEqual(['loose/shopping-list.jpg']);
    const message = await page.textContent('article.failed .message');
    expect(message).toMatch(/not an image/);
    expect(await page.textContent('#count')).toBe(`showing 1 of ${summary.done + 1}`);
    await page.screenshot({ path: join(SHOTS, 'sheet-failed.png') });

    await page.selectOption('#show', 'done');
    expect((await cards()).filter((c) => !c.hidden)).toHaveLength(summary.done);
    await page.selectOption('#show', 'all');
    expect((await cards()).every((c) => !c.hidden)).toBe(true);
  });

  it('moves the before/after divider', async () => {
    const first = page.locator('[data-compare]').first();
    await first.locator('input[type=range]').fill('20');
    expect(await first.locator('.before-clip').evaluate((el) => (el as HTMLElement).style.clipPath)).toBe('inset(0px 80% 0px 0px)');
    await first.locator('input[type=range]').fill('50');
    await page.screenshot({ path: join(SHOTS, 'sheet.png') });
    await page.screenshot({ path: join(SHOTS, 'sheet-full.png'), fullPage: true });
  });

  it('embeds the pictures as data URIs when asked', async () => {
    const out = join(root, 'embedded.html');
    await makeSheet({ run, output: out, embed: true, previewSize: 256 });
    const html = await readFile(out, 'utf8');
    const srcs = [...html.matchAll(/<img [^>]*src="([^"]*)"/g)].map((m) => m[1]!);
    expect(srcs.length).toBe(5 * summary.done);
    expect(srcs.every((s) => s.startsWith('data:image/jpeg;base64,'))).toBe(true);
  });
});

describe('a damaged provenance record', () => {
  it('shows as a damaged card and the sheet goes on (the real CLI)', async () => {
    const copy = join(root, 'damaged-run');
    await cp(run, copy, { recursive: true });
    const records = (await readdir(copy)).filter((name) => name.endsWith('.kinhue.json')).sort();
    expect(records.length).toBeGreaterThanOrEqual(2);
    // One record cut down by hand, one that parses but is not a record at all.
    const edited = JSON.parse(await readFile(join(copy, records[0]!), 'utf8'));
    delete edited.source.width;
    delete edited.timings;
    await writeFile(join(copy, records[0]!), JSON.stringify(edited));
    await writeFile(join(copy, records[1]!), '[]');

    const out = join(copy, 'review.html');
    const cli = spawnSync(process.execPath, [BIN, 'sheet', copy, '-o', out], { encoding: 'utf8', timeout: 120_000 });
    expect(cli.stderr).toBe('');
    expect(cli.status).toBe(0);
    expect(cli.stdout).toContain(`(${summary.done - 2} restored, 3 failed)`);

    const view = await context.newPage();
    try {
      await view.goto(pathToFileURL(out).href, { waitUntil: 'load' });
      const damaged = await view.$$eval('article.failed', (els) =>
        els
          .filter((el) => el.querySelector('.badge')?.textContent === 'damaged record')
          .map((el) => `${el.querySelector('.message')?.textContent} / ${el.querySelector('.hint')?.textContent}`),
      );
      expect(damaged).toHaveLength(2);
      expect(damaged.join('\n')).toContain(`${records[0]} is damaged: missing or wrong source.width, timings`);
      expect(damaged.join('\n')).toContain(`${records[1]} is damaged: not a JSON object`);
      expect(damaged.join('\n')).toContain(`next step: delete ${records[0]} and run the same restore command again`);
    } finally {
      await view.close();
    }
  });
});

describe('relative links', () => {
  it('percent-encodes each path segment and joins with /', () => {
    expect(relativeUrl('/a/out', '/a/scans/Farm #2/hay cart.jpg')).toBe('../scans/Farm%20%232/hay%20cart.jpg');
  });
});

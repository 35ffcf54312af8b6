import { mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEFAULT_MODEL_DIR, readModelFiles } from '../src/model/index.js';
import { DEMO_RUNS, restoreDemoAlbum } from './helpers/demo-album.js';

// Digests of the demo album restored with the shipped model by kinhue before restore was split into stages
// (commit c7efb42, then again with the skin prior and ONNX Runtime added on the same pre-stages code), made by
// this suite with KINHUE_WRITE_DIGESTS=1 in a checkout of that code.
// A retrained model needs new ones, made the same way with the code from before any change to restore. The
// shipped model's vividness of 0.25 came with new ones, made by the code that added it, which at vividness 0
// reproduced the earlier digests.
const FIXTURE = join(__dirname, 'fixtures', 'demo-album-digests.json');

interface Fixture {
  weightsSha256: string;
  vividness: number;
  runs: Record<string, Record<string, string>>;
}

let root: string;
beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'kinhue-demo-album-'));
});
afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('restore of the demo album gives the same outputs bit for bit as before', () => {
  for (const run of Object.keys(DEMO_RUNS)) {
    it(`${run}: images, confidence maps, records and manifest`, async () => {
      const { meta } = await readModelFiles(DEFAULT_MODEL_DIR);
      const digests = await restoreDemoAlbum(join(root, run), run);
      if (process.env.KINHUE_WRITE_DIGESTS === '1') {
        const old = (JSON.parse(await readFile(FIXTURE, 'utf8').catch(() => '{"runs":{}}')) as Fixture).runs;
        const runs = { ...old, [run]: digests };
        await writeFile(FIXTURE, `${JSON.stringify({ weightsSha256: meta.weightsSha256, vividness: meta.vividness, runs }, null, 2)}\n`);
      }
      const fixture = JSON.parse(await readFile(FIXTURE, 'utf8')) as Fixture;
      expect(meta.weightsSha256, 'the shipped model changed: make new digests with the code from before the change').toBe(
        fixture.weightsSha256,
      );
      expect(meta.vividness, "the shipped model's vividness changed: make new digests").toBe(fixture.vividness);
      expect(digests).toEqual(fixture.runs[run]);
    }, 900_000);
  }
});

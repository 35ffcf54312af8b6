/**
 * The review sheet for a restore output folder: reads its manifests (`kinhue-run.jsonl`, and one per
 * part when the run was split over machines, read as one) and each
 * result's provenance record, measures each confidence map, and writes one HTML page. Pictures are
 * linked by relative paths (the page works from any copy of the folder, a USB stick included) or,
 * with `embed`, put inside the page as previews. Formats browsers cannot show (TIFF) always get an
 * embedded preview.
 */
import { readFile, stat } from 'node:fs/promises';
import { dirname, extname, isAbsolute, join, relative, resolve, sep } from 'node:path';
import { pathToFileURL } from 'node:url';
import { loadRunFolder, MANIFEST_NAME, type ManifestRecord, type ProvenanceRecord } from '../batch/index.js';
import { underFolder, writeFileAtomic } from '../files/index.js';
import { ErrorCodes, KinhueError } from '../errors.js';
import { downscaleToFloatRgb } from '../colour/index.js';
import { decodeImage, encodeBuffer, type Pixels } from '../image/index.js';
import { confidenceHistogram } from './histogram.js';
import { renderSheetHtml, type SheetData, type SheetImage, type SheetPhoto } from './sheet-html.js';
import { recordDamage } from './sheet-record.js';

/** What to make a sheet of. */
/** The sheet's defaults, declared once (the command line shows them). */
export const SHEET_DEFAULTS = { embed: false, previewSize: 1200 } as const;

export interface SheetOptions {
  /** The restore output folder. */
  run: string;
  /** The page to write. Default `<run>/kinhue-sheet.html`. */
  output?: string;
  /** Put the pictures inside the page (as JPEG previews) instead of linking to them. */
  embed?: boolean;
  /** Long side in pixels of embedded previews. Default 1200. */
  previewSize?: number;
}

/** What was written. */
export interface SheetResult {
  output: string;
  restored: number;
  failed: number;
}

/** The page's default name inside the run folder. */
export const SHEET_NAME = 'kinhue-sheet.html';

/** Extensions every current browser displays. */
const BROWSER_FORMATS = new Set(['.jpg', '.jpeg', '.jpe', '.png', '.webp', '.gif', '.avif', '.bmp']);

const HISTOGRAM_BINS = 10;

async function exists(path: string): Promise<boolean> {
  return stat(path).then(
    (s) => s.isFile(),
    () => false,
  );
}

/**
 * A relative URL from the page's folder to a file: each segment percent-encoded, '/' between. On
 * another drive (Windows) no relative path exists: then a file: URL.
 * @example
 * relativeUrl('/a/out', '/a/scans/hay cart.jpg'); // '../scans/hay%20cart.jpg'
 */
export function relativeUrl(fromDir: string, file: string): string {
  const rel = relative(fromDir, file);
  if (isAbsolute(rel)) return pathToFileURL(file).href;
  return rel.split(sep).map(encodeURIComponent).join('/');
}

/** A JPEG preview of pixels as a data: URI, long side at most `size`. */
async function previewUri(pixels: Pixels, size: number): Promise<string> {
  const small = downscaleToFloatRgb(pixels, size);
  const data = new Uint8Array(small.data.length);
  for (let i = 0; i < data.length; i++) data[i] = Math.round(small.data[i] * 255);
  const { data: jpeg } = await encodeBuffer(
    { width: small.width, height: small.height, channels: 3, depth: 8, data },
    { format: 'jpeg', quality: 85 },
  );
  return `data:image/jpeg;base64,${jpeg.toString('base64')}`;
}

interface Context {
  pageDir: string;
  embed: boolean;
  previewSize: number;
}

/** An image reference for the page, or undefined when the file is not there. */
async function imageFor(file: string | undefined, ctx: Context, size?: { width: number; height: number }): Promise<SheetImage | undefined> {
  if (!file || !(await exists(file))) return undefined;
  const dims = size ? { width: size.width, height: size.height } : {};
  if (!ctx.embed && BROWSER_FORMATS.has(extname(file).toLowerCase())) return { src: relativeUrl(ctx.pageDir, file), ...dims };
  try {
    const { pixels } = await decodeImage(file);
    return { src: await previewUri(pixels, ctx.previewSize), width: pixels.width, height: pixels.height };
  } catch {
    return undefined;
  }
}

/** Provenance as label/value rows for people. */
/** How the record's colour was chosen (records written before the choice existed say only a temperature). */
function decodingLabel(settings: { decoding?: string; temperature: number; vividness?: number }): string {
  if (settings.decoding !== 'least-ciede2000') return `annealed mean, temperature ${settings.temperature}`;
  return `least expected CIEDE2000 colour${settings.vividness ? `, vividness ${settings.vividness}` : ''}`;
}

function provenanceRows(p: ProvenanceRecord): [string, string][] {
  const s = p.source;
  const rows: [string, string][] = [
    ['source', s.path],
    [
      'source size',
      `${s.width} x ${s.height} px, ${s.bitDepth}-bit, ${s.channels} channel${s.channels === 1 ? '' : 's'}, ${s.format}, ${s.bytes} bytes`,
    ],
    ['source SHA-256', s.sha256],
    [
      'tone',
      p.tone.kind === 'toned'
        ? `toned print (${p.tone.name ?? 'tint'}), tint a* ${p.tone.tint.a}, b* ${p.tone.tint.b}: removed`
        : p.tone.kind,
    ],
    ['result', `${p.result.image} (${p.result.format}, ${p.result.bitDepth}-bit)`],
    ['model', `${p.model.name}, weights SHA-256 ${p.model.weightsSha256}`],
    [
      'settings',
      `work size ${p.settings.workSize} px, ${decodingLabel(p.settings)}, format ${p.settings.format}` +
        (p.settings.quality === null ? '' : `, quality ${p.settings.quality}`),
    ],
    ['backend', p.backend],
    ['mean confidence', String(p.meanConfidence)],
    ['time', `${(p.timings.total / 1000).toFixed(1)} s (model ${(p.timings.model / 1000).toFixed(1)} s)`],
    ['made', `${p.created} by kinhue ${p.kinhue}`],
    ['statement', p.statement],
  ];
  if (p.repair)
    rows.push([
      'repair',
      `${p.repair.pixels} pixels (${(100 * p.repair.share).toFixed(3)}%) replaced: ${p.repair.method}; mask ${p.repair.mask}`,
    ]);
  const skin = skinFact(p);
  if (skin) rows.push(['skin prior', `${skin}; faces at ${p.guidance!.skin!.faces.map(faceWhere).join(', ')}`]);
  if (p.warnings.length) rows.push(['warnings', p.warnings.join('; ')]);
  return rows;
}

/** Where a face is, in words a reader can find on the picture: its box in percent from the top-left corner. */
function faceWhere(f: { x: number; y: number; width: number; height: number }): string {
  const pct = (v: number): string => `${Math.round(v * 100)}%`;
  return `${pct(f.x)} across, ${pct(f.y)} down (${pct(f.width)} x ${pct(f.height)})`;
}

/** How many faces were given a skin hue, or undefined when none (older records have no skin field). */
function skinFact(p: ProvenanceRecord): string | undefined {
  const n = p.guidance?.skin?.faces.length ?? 0;
  return n ? `${n} face${n === 1 ? '' : 's'} given a skin hue (a guess: check, correct with hints)` : undefined;
}

/** The facts worth seeing without opening the record. */
function keyFactsOf(p: ProvenanceRecord): [string, string][] {
  const s = p.source;
  return [
    ['scan', `${s.width} x ${s.height} px, ${s.bitDepth}-bit ${s.format.toUpperCase()}`],
    ['tone', p.tone.kind === 'toned' ? `toned (${p.tone.name ?? 'tint'}), tint removed` : p.tone.kind],
    ['result', `${p.result.format.toUpperCase()}, ${p.result.bitDepth}-bit`],
    ['time', `${(p.timings.total / 1000).toFixed(1)} s`],
    ...(skinFact(p) ? [['skin prior', skinFact(p)!] as [string, string]] : []),
  ];
}

function failed(name: string, message: string, details: [string, string][], code?: string, hint?: string): SheetPhoto {
  return { name, status: 'failed', details, error: { code, message, hint } };
}

/** One manifest record as a sheet entry. */
async function photoFor(run: string, record: ManifestRecord, ctx: Context): Promise<SheetPhoto> {
  const basic: [string, string][] = [
    ['source', record.source],
    ['recorded', record.time],
  ];
  if (record.status === 'failed') {
    const e = record.error ?? { code: undefined, message: 'failed (no message recorded)', hint: undefined };
    return failed(record.output, e.message, basic, e.code, e.hint);
  }
  const resultPath = underFolder(run, record.output);
  const recordName =
    record.companions?.find((c) => c.endsWith('.kinhue.json')) ??
    `${record.output.slice(0, record.output.length - extname(record.output).length)}.kinhue.json`;
  const recordPath = underFolder(run, recordName);
  let parsed: unknown;
  try {
    parsed = JSON.parse(await readFile(recordPath, 'utf8'));
  } catch {
    return failed(
      record.output,
      `its provenance record ${recordName} is missing or unreadable`,
      basic,
      undefined,
      'run the same restore command again to redo this file',
    );
  }
  const damage = recordDamage(parsed);
  if (damage) {
    return {
      ...failed(
        record.output,
        `its provenance record ${recordName} is damaged: ${damage}`,
        basic,
        undefined,
        `delete ${recordName} and run the same restore command again to redo this file`,
      ),
      damaged: true,
    };
  }
  const provenance = parsed as ProvenanceRecord;
  if (!(await exists(resultPath))) {
    return failed(
      record.output,
      `the result ${record.output} is missing from the output folder`,
      basic,
      undefined,
      'run the same restore command again to redo this file',
    );
  }
  const size = { width: provenance.source.width, height: provenance.source.height };
  const confidencePath = provenance.result.confidenceMap ? join(dirname(resultPath), provenance.result.confidenceMap) : undefined;
  let histogram: number[] | undefined;
  if (confidencePath && (await exists(confidencePath))) {
    try {
      const { pixels } = await decodeImage(confidencePath);
      histogram = pixels.depth === 8 ? confidenceHistogram(pixels.data as Uint8Array, pixels.channels, HISTOGRAM_BINS) : undefined;
    } catch {
      histogram = undefined;
    }
  }
  return {
    name: provenance.source.relative,
    status: 'done',
    scan: await imageFor(provenance.source.path ?? record.source, ctx, size),
    result: await imageFor(resultPath, ctx, size),
    confidence: await imageFor(confidencePath, ctx, size),
    ...(provenance.repair
      ? {
          repairMask: await imageFor(join(dirname(resultPath), provenance.repair.mask), ctx, size),
          ...(provenance.repair.scan ? { repaired: await imageFor(join(dirname(resultPath), provenance.repair.scan), ctx, size) } : {}),
        }
      : {}),
    meanConfidence: provenance.meanConfidence,
    histogram,
    facts: keyFactsOf(provenance),
    details: provenanceRows(provenance),
  };
}

/** Distinct values of one fact over the photos, joined. */
function distinct(values: string[]): string {
  return [...new Set(values)].join('; ');
}

/**
 * Reads a restore output folder into the sheet's data (pictures referenced from `pageDir`).
 * Throws KinhueError KH_UNREADABLE when the folder holds no run manifest.
 * @example
 *   const data = await readRun('restored', 'restored', { embed: false });
 */
export async function readRun(run: string, pageDir: string, options: { embed?: boolean; previewSize?: number } = {}): Promise<SheetData> {
  const folder = await loadRunFolder(run);
  if (folder.manifests.length === 0) {
    const isFolder = await stat(run).then(
      (s) => s.isDirectory(),
      () => false,
    );
    throw new KinhueError(
      ErrorCodes.UNREADABLE,
      isFolder ? `holds no ${MANIFEST_NAME}: not the output folder of a restore run` : 'folder not found',
      {
        file: run,
        hint: 'pass the folder given to kinhue restore as --out',
      },
    );
  }
  const records = [...folder.records.values()];
  const ctx: Context = {
    pageDir: resolve(pageDir),
    embed: options.embed ?? SHEET_DEFAULTS.embed,
    previewSize: options.previewSize ?? SHEET_DEFAULTS.previewSize,
  };
  const photos: SheetPhoto[] = [];
  for (const record of records) photos.push(await photoFor(run, record, ctx));
  const provenances = photos.filter((p) => p.status === 'done').map((p) => Object.fromEntries(p.details));
  const facts: [string, string][] = [];
  if (provenances.length) {
    facts.push(['model', distinct(provenances.map((d) => d.model.split(',')[0]))]);
    facts.push(['settings', distinct(provenances.map((d) => d.settings))]);
    facts.push(['backend', distinct(provenances.map((d) => d.backend))]);
  }
  return { folder: run, generated: new Date().toISOString().replace(/\.\d+Z$/, 'Z'), facts, photos };
}

/**
 * Writes the review sheet of a restore output folder (atomically) and says what it holds.
 * @example
 *   const { output } = await makeSheet({ run: 'restored' }); // restored/kinhue-sheet.html
 */
export async function makeSheet(options: SheetOptions): Promise<SheetResult> {
  const output = options.output ?? join(options.run, SHEET_NAME);
  const data = await readRun(options.run, dirname(resolve(output)), options);
  await writeFileAtomic(output, renderSheetHtml(data));
  return {
    output,
    restored: data.photos.filter((p) => p.status === 'done').length,
    failed: data.photos.filter((p) => p.status === 'failed').length,
  };
}

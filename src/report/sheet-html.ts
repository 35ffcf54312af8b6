/**
 * The review sheet's markup: one self-contained HTML page (inline CSS, inline script, no network)
 * from plain data about a restore run. Reading the run folder lives in sheet.ts.
 */
import { histogramSvg } from './histogram.js';
import { SHEET_SCRIPT, SHEET_STYLE } from './sheet-assets.js';

/** An image on the sheet: a relative URL or a data: URI. */
export interface SheetImage {
  src: string;
  width?: number;
  height?: number;
}

/** One input of the run as the sheet shows it. */
export interface SheetPhoto {
  /** The input's path relative to the run (what the reviewer recognises). */
  name: string;
  status: 'done' | 'failed';
  scan?: SheetImage;
  result?: SheetImage;
  confidence?: SheetImage;
  /** The repair mask (white where a pixel was replaced), when the scan was repaired. */
  repairMask?: SheetImage;
  /** The repaired scan without colour, when it was written. */
  repaired?: SheetImage;
  /** Mean confidence 0-1 (done photos with a confidence map). */
  meanConfidence?: number;
  /** Fractions of pixels per confidence bin, low to high. */
  histogram?: number[];
  /** A few facts shown at once (size, tone, time). */
  facts?: [string, string][];
  /** Provenance as label/value rows (shown on request). */
  details: [string, string][];
  /** Why a failed input failed. */
  error?: { code?: string; message: string; hint?: string };
  /** Restored, but its provenance record cannot be read as one: shown among the failed, marked damaged. */
  damaged?: boolean;
}

/** Everything one sheet shows. */
export interface SheetData {
  /** The restore output folder, as the person named it. */
  folder: string;
  /** ISO time the sheet was made. */
  generated: string;
  /** Short facts about the run shown in the header (model, settings). */
  facts: [string, string][];
  photos: SheetPhoto[];
}

/** Escapes text for HTML element content and double-quoted attributes. */
export function escapeHtml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

function img(image: SheetImage | undefined, alt: string, cls: string): string {
  if (!image) return `<div class="missing ${cls}">not written</div>`;
  const size = image.width && image.height ? ` width="${image.width}" height="${image.height}"` : '';
  return `<img class="${cls}" src="${escapeHtml(image.src)}" alt="${escapeHtml(alt)}"${size} decoding="async">`;
}

function confidenceBadge(mean: number | undefined): string {
  if (mean === undefined || Number.isNaN(mean)) return '<span class="badge">no confidence map</span>';
  const pct = Math.round(mean * 100);
  return (
    `<span class="badge meter" title="mean confidence over all pixels">mean confidence <b>${mean.toFixed(2)}</b>` +
    `<span class="track"><span class="fill" style="width:${pct}%"></span></span></span>`
  );
}

function detailsTable(rows: [string, string][], label: string): string {
  if (rows.length === 0) return '';
  const body = rows.map(([k, v]) => `<tr><th>${escapeHtml(k)}</th><td>${escapeHtml(v)}</td></tr>`).join('');
  return `<details><summary>${label}</summary><table class="prov">${body}</table></details>`;
}

function keyFacts(rows: [string, string][] | undefined): string {
  if (!rows?.length) return '';
  return `<dl class="keyfacts">${rows.map(([k, v]) => `<dt>${escapeHtml(k)}</dt><dd>${escapeHtml(v)}</dd>`).join('')}</dl>`;
}

function doneCard(p: SheetPhoto, index: number): string {
  const name = escapeHtml(p.name);
  const compare =
    p.scan && p.result
      ? p.repaired
        ? // Two views stacked in the first column: scan against the result, and against the repaired scan.
          `<div class="viewers">${compareView(p.scan, p.result, `scan ${p.name}`, `colourised ${p.name}`, 'result')}` +
          `${compareView(p.scan, p.repaired, `scan ${p.name}`, `repaired ${p.name}`, 'repaired')}</div>`
        : compareView(p.scan, p.result, `scan ${p.name}`, `colourised ${p.name}`, 'result')
      : '<div class="viewer missing">no comparison: the scan or the result is not there</div>';
  return (
    `<article class="photo" data-status="done" data-name="${name}" data-order="${index}" ` +
    `data-confidence="${p.meanConfidence ?? ''}">` +
    `<header><h2>${name}</h2>${confidenceBadge(p.meanConfidence)}</header>` +
    `<div class="body">${compare}<div class="side">` +
    `<div class="trio${p.repairMask ? ' four' : ''}"><figure>${img(p.scan, `scan ${p.name}`, 'thumb')}<figcaption>scan</figcaption></figure>` +
    `<figure>${img(p.result, `colourised ${p.name}`, 'thumb')}<figcaption>result</figcaption></figure>` +
    `<figure>${img(p.confidence, `confidence map of ${p.name}`, 'thumb')}<figcaption>confidence (white = sure)</figcaption></figure>` +
    (p.repairMask
      ? `<figure>${img(p.repairMask, `repair mask of ${p.name}`, 'thumb')}<figcaption>repaired (white = replaced)</figcaption></figure>`
      : '') +
    `</div>` +
    `<div class="chart">${p.histogram ? `<div><div class="label">pixels by confidence</div>${histogramSvg(p.histogram)}</div>` : ''}` +
    `${keyFacts(p.facts)}</div>` +
    detailsTable(p.details, 'provenance record') +
    `</div></div></article>`
  );
}

/** A before/after view with a divider to drag: the scan on the left of it, `after` on the right. */
function compareView(scan: SheetImage, after: SheetImage, scanAlt: string, afterAlt: string, afterTag: string): string {
  return (
    `<div class="viewer"><div class="compare" data-compare>` +
    `${img(after, afterAlt, 'after')}` +
    `<div class="before-clip">${img(scan, scanAlt, 'before')}</div>` +
    `<div class="divider"></div>` +
    `<input type="range" min="0" max="100" value="50" aria-label="move the divider between scan and ${afterTag}">` +
    `<span class="tag left">scan</span><span class="tag right">${afterTag}</span></div></div>`
  );
}

function failedCard(p: SheetPhoto, index: number): string {
  const name = escapeHtml(p.name);
  const e = p.error ?? { message: 'failed (no message recorded)' };
  return (
    `<article class="photo failed" data-status="failed" data-name="${name}" data-order="${index}" data-confidence="">` +
    `<header><h2>${name}</h2><span class="badge bad">${p.damaged ? 'damaged record' : 'failed'}${e.code ? ` &middot; ${escapeHtml(e.code)}` : ''}</span></header>` +
    `<p class="message">${escapeHtml(e.message)}</p>` +
    (e.hint ? `<p class="hint">next step: ${escapeHtml(e.hint)}</p>` : '') +
    detailsTable(p.details, 'details') +
    `</article>`
  );
}

/**
 * The whole page. Cards are written least confident first (failed ones last); the inline script
 * re-sorts and filters in place.
 * @example
 * const html = renderSheetHtml({ folder: 'restored', generated: new Date().toISOString(), facts: [], photos });
 */
export function renderSheetHtml(data: SheetData): string {
  const done = data.photos.filter((p) => p.status === 'done');
  const failed = data.photos.filter((p) => p.status === 'failed');
  const confidences = done.map((p) => p.meanConfidence).filter((c): c is number => c !== undefined && !Number.isNaN(c));
  const overall = confidences.length ? confidences.reduce((s, c) => s + c, 0) / confidences.length : undefined;
  const ordered = [...done]
    .sort((x, y) => (x.meanConfidence ?? 2) - (y.meanConfidence ?? 2) || x.name.localeCompare(y.name))
    .concat([...failed].sort((x, y) => x.name.localeCompare(y.name)));
  const cards = ordered.map((p, i) => (p.status === 'done' ? doneCard(p, i) : failedCard(p, i))).join('\n');
  const facts = [
    ['photos', `${done.length} restored, ${failed.length} failed`],
    ...(overall === undefined ? [] : [['mean confidence', overall.toFixed(2)]]),
    ...data.facts,
    ['sheet made', data.generated],
  ]
    .map(([k, v]) => `<div><dt>${escapeHtml(k)}</dt><dd>${escapeHtml(v)}</dd></div>`)
    .join('');
  return `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src 'self' data: file:; style-src 'unsafe-inline'; script-src 'unsafe-inline'">
<title>kinhue review: ${escapeHtml(data.folder)}</title>
<style>${SHEET_STYLE}</style>
</head>
<body>
<header class="top">
<h1>Review sheet <span class="folder">${escapeHtml(data.folder)}</span></h1>
<p class="note">Colour in these results is estimated by kinhue: an interpretation, not a record. Keep the scans as the record.</p>
<dl class="facts">${facts}</dl>
<div class="controls">
<label>Order <select id="sort">
<option value="confidence-asc" selected>least confident first</option>
<option value="confidence-desc">most confident first</option>
<option value="name">by name</option>
<option value="failed-first">failed first</option>
</select></label>
<label>Show <select id="show">
<option value="all" selected>all (${data.photos.length})</option>
<option value="done">restored (${done.length})</option>
<option value="failed">failed only (${failed.length})</option>
</select></label>
<span id="count" aria-live="polite"></span>
</div>
</header>
<main id="photos">
${cards}
</main>
<p class="empty" id="empty" hidden>Nothing to show with this filter.</p>
<script>${SHEET_SCRIPT}</script>
</body>
</html>
`;
}

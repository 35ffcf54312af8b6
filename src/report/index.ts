// Scoring against colour originals, tables, CSV/JSON, and the HTML review sheet. Re-exports only.
export * from './reinhard.js';
export * from './training-colour.js';
export * from './table.js';
export * from './csv.js';
export * from './score-report.js';
export * from './verdict.js';
export * from './score.js';
export * from './histogram.js';
export * from './sheet-html.js';
export * from './sheet.js';

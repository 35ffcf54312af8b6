/**
 * What `kinhue restore` prints: the dry-run plan, per-file lines and the progress text, the final
 * summary for people, and the JSON summary for machines. Pure functions returning text.
 */
import { partLabel, type PlannedFile, type RestoreSummary } from '../batch/index.js';
import { formatDuration } from './progress.js';

/**
 * One line per discovered file: what a run would do with it.
 * @example
 *   formatPlan(summary.files); // "run       scans/a.jpg -> a.jpg\nskip      scans/b.tif -> b.tif  (finished earlier, same settings)"
 */
export function formatPlan(files: PlannedFile[]): string {
  const label = { run: 'run     ', retry: 'retry   ', skip: 'skip    ', conflict: 'conflict', refuse: 'refuse  ' } as const;
  const why = {
    run: '',
    retry: '  (failed earlier)',
    skip: '  (finished earlier, same settings)',
    conflict: "  (holds another scan's result; --force replaces it)",
    refuse: '  (an output would replace an input)',
  } as const;
  return files.map((f) => `${label[f.action]}  ${f.rel} -> ${f.outputs.image}${why[f.action]}`).join('\n');
}

/**
 * The progress text: files done of all, rate and time left.
 * @example
 *   progressText(3, 1, 40, 90); // "4/40 files  2.7/min  ~14m 00s left"
 */
export function progressText(done: number, failed: number, total: number, elapsedSeconds: number): string {
  const finished = done + failed;
  const perMinute = elapsedSeconds > 0 ? (finished * 60) / elapsedSeconds : 0;
  const left = finished > 0 ? ((total - finished) * elapsedSeconds) / finished : NaN;
  const rate = finished > 0 ? `  ${perMinute.toFixed(1)}/min  ~${formatDuration(left)} left` : '';
  return `${finished}/${total} files${failed ? ` (${failed} failed)` : ''}${rate}`;
}

/**
 * The summary for people: counts, time, the failures with their messages and next steps, the hints
 * not used, and where the manifest is.
 * @example
 *   console.log(formatSummary(summary));
 */
export function formatSummary(summary: RestoreSummary): string {
  const lines: string[] = [];
  const part = summary.part ? ` (${partLabel(summary.part)}: ${summary.total} of the ${summary.found} files found)` : '';
  if (summary.dryRun) {
    const run = summary.files.filter((f) => f.action === 'run' || f.action === 'retry').length;
    lines.push(`dry run${part}: ${run} of ${summary.total} files would be restored into ${summary.outDir}; nothing was written`);
  } else {
    const parts = [`${summary.done} restored`];
    if (summary.skipped) parts.push(`${summary.skipped} skipped (finished earlier)`);
    if (summary.failed.length) parts.push(`${summary.failed.length} failed`);
    if (summary.notRun) parts.push(`${summary.notRun} not run`);
    lines.push(
      `kinhue restore${part}: ${parts.join(', ')} of ${summary.total} files in ${formatDuration(summary.seconds)} -> ${summary.outDir}`,
    );
    if (summary.interrupted) lines.push('stopped early: run the same command again to finish the rest');
  }
  if (summary.failed.length) {
    lines.push(summary.dryRun ? 'would fail:' : 'failed:');
    for (const f of summary.failed) {
      lines.push(`  ${f.rel}: ${f.code} ${f.message}`);
      if (f.hint) lines.push(`    next step: ${f.hint}`);
    }
  }
  if (summary.hintsNotUsed.length) {
    lines.push('hints not used (restored without them):');
    for (const h of summary.hintsNotUsed) lines.push(`  ${h.rel ? `${h.rel}: ` : `${h.file} `}${h.reason.replace(/\n/g, '\n    ')}`);
  }
  if (summary.dryRun) return lines.join('\n');
  lines.push(`manifest: ${summary.manifest}`);
  if (summary.done) lines.push('The colours are estimates by a model, not a record: keep the scans as the originals.');
  return lines.join('\n');
}

/**
 * The summary as JSON (one object, newline-terminated), for --json.
 * @example
 *   process.stdout.write(summaryToJson(summary));
 */
export function summaryToJson(summary: RestoreSummary): string {
  const files = summary.files.map((f) => ({
    source: f.source,
    relative: f.rel,
    action: f.action,
    status: f.status,
    output: f.outputs.image,
    confidenceMap: summary.settings.confidence ? f.outputs.confidence : null,
    record: f.outputs.record,
  }));
  return `${JSON.stringify({ ...summary, files }, null, 2)}\n`;
}

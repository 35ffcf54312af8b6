/**
 * Plain-text tables for terminals: a header (one line or more), a rule, then rows, each column padded
 * to its widest cell. Numbers align right so their decimal points line up when they share a precision.
 */

/** One column of a text table. */
export interface TableColumn {
  /** The heading; a line break splits it over two or more lines (bottom-aligned), keeping the column narrow. */
  label: string;
  /** 'right' for figures, 'left' (default) for names. */
  align?: 'left' | 'right';
}

/** A rule row: drawn as dashes across every column. */
export const TABLE_RULE = Symbol('rule');

/** A row of one text written across the columns as it is (a heading such as a photo's name); it sets no width. */
export interface TableSpan {
  span: string;
}

/**
 * Renders rows of cells under their column labels, two spaces between columns, no trailing spaces.
 * @example
 * renderTable([{ label: 'photo' }, { label: 'PSNR', align: 'right' }], [['barn.jpg', '24.31']]);
 * // "photo      PSNR\n--------  -----\nbarn.jpg  24.31"
 */
export function renderTable(columns: readonly TableColumn[], rows: readonly (readonly string[] | typeof TABLE_RULE | TableSpan)[]): string {
  const labels = columns.map((column) => column.label.split('\n'));
  const depth = Math.max(...labels.map((l) => l.length));
  const heading = Array.from({ length: depth }, (_, k) => labels.map((l) => l[k - (depth - l.length)] ?? ''));
  const cells = rows.filter((row): row is readonly string[] => Array.isArray(row));
  const widths = columns.map((_, c) => Math.max(...labels[c].map((l) => l.length), ...cells.map((row) => (row[c] ?? '').length)));
  const line = (cells: readonly string[]): string =>
    columns
      .map((column, c) => {
        const cell = cells[c] ?? '';
        return column.align === 'right' ? cell.padStart(widths[c]) : cell.padEnd(widths[c]);
      })
      .join('  ')
      .trimEnd();
  const rule = widths.map((w) => '-'.repeat(w)).join('  ');
  return [
    ...heading.map(line),
    rule,
    ...rows.map((row) => (row === TABLE_RULE ? rule : Array.isArray(row) ? line(row) : (row as TableSpan).span.trimEnd())),
  ].join('\n');
}

/** A number with fixed decimals, or a dash when it is not finite (e.g. PSNR of identical images). */
export function formatFigure(value: number | null | undefined, decimals: number): string {
  if (value === null || value === undefined || Number.isNaN(value)) return '-';
  if (value === Infinity) return 'inf';
  return value.toFixed(decimals);
}

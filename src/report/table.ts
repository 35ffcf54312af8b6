/**
 * Plain-text tables for terminals: one header row, a rule, then rows, each column padded to its
 * widest cell. Numbers align right so their decimal points line up when they share a precision.
 */

/** One column of a text table. */
export interface TableColumn {
  label: string;
  /** 'right' for figures, 'left' (default) for names. */
  align?: 'left' | 'right';
}

/** A rule row: drawn as dashes across every column. */
export const TABLE_RULE = Symbol('rule');

/**
 * Renders rows of cells under their column labels, two spaces between columns, no trailing spaces.
 * @example
 * renderTable([{ label: 'photo' }, { label: 'PSNR', align: 'right' }], [['barn.jpg', '24.31']]);
 * // "photo      PSNR\n--------  -----\nbarn.jpg  24.31"
 */
export function renderTable(columns: readonly TableColumn[], rows: readonly (readonly string[] | typeof TABLE_RULE)[]): string {
  const widths = columns.map((column, c) =>
    Math.max(column.label.length, ...rows.map((row) => (row === TABLE_RULE ? 0 : (row[c] ?? '').length))));
  const line = (cells: readonly string[]): string =>
    columns.map((column, c) => {
      const cell = cells[c] ?? '';
      return column.align === 'right' ? cell.padStart(widths[c]) : cell.padEnd(widths[c]);
    }).join('  ').trimEnd();
  const rule = widths.map((w) => '-'.repeat(w)).join('  ');
  return [line(columns.map((c) => c.label)), rule, ...rows.map((row) => (row === TABLE_RULE ? rule : line(row)))].join('\n');
}

/** A number with fixed decimals, or a dash when it is not finite (e.g. PSNR of identical images). */
export function formatFigure(value: number | null | undefined, decimals: number): string {
  if (value === null || value === undefined || Number.isNaN(value)) return '-';
  if (value === Infinity) return 'inf';
  return value.toFixed(decimals);
}

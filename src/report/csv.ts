/**
 * Comma-separated values as RFC 4180 describes them: CRLF line ends, fields holding a comma, a
 * double quote or a line break are quoted, and quotes inside them doubled.
 */

/** One CSV field. Numbers are written in full (not rounded); null and NaN become an empty field. */
export function csvField(value: string | number | null | undefined): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'number') return Number.isNaN(value) ? '' : String(value);
  return /[",\r\n]/.test(value) ? `"${value.replace(/"/g, '""')}"` : value;
}

/**
 * A whole CSV document from a header and rows, ending with a line break.
 * @example
 * toCsv(['photo', 'psnr'], [['a,b.jpg', 24.5]]); // 'photo,psnr\r\n"a,b.jpg",24.5\r\n'
 */
export function toCsv(header: readonly string[], rows: readonly (readonly (string | number | null | undefined)[])[]): string {
  return [header, ...rows].map((row) => row.map(csvField).join(',')).join('\r\n') + '\r\n';
}

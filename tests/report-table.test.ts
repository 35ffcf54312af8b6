import { describe, expect, it } from 'vitest';
import { csvField, toCsv } from '../src/report/csv.js';
import { confidenceHistogram, histogramSvg, meanConfidenceOf } from '../src/report/histogram.js';
import { TABLE_RULE, formatFigure, renderTable } from '../src/report/table.js';
import { escapeHtml } from '../src/report/sheet-html.js';

describe('text tables', () => {
  it('pads columns to their widest cell, figures to the right', () => {
    const text = renderTable([{ label: 'photo' }, { label: 'PSNR', align: 'right' }], [['barn.jpg', '24.31'], TABLE_RULE, ['a', '5.00']]);
    expect(text.split('\n')).toEqual(['photo      PSNR', '--------  -----', 'barn.jpg  24.31', '--------  -----', 'a          5.00']);
  });

  it('splits a heading over lines at line breaks, bottom-aligned, and writes span rows as they are', () => {
    const text = renderTable(
      [{ label: 'photo' }, { label: 'right\nhue %', align: 'right' }, { label: 'PSNR', align: 'right' }],
      [{ span: 'a-long-photo-name.jpg' }, ['  grey', '0.0', '24.31'], TABLE_RULE, ['  model', '-', '5.00']],
    );
    expect(text.split('\n')).toEqual([
      '         right',
      'photo    hue %   PSNR',
      '-------  -----  -----',
      'a-long-photo-name.jpg',
      '  grey     0.0  24.31',
      '-------  -----  -----',
      '  model      -   5.00',
    ]);
  });

  it('writes missing and infinite figures as marks, not numbers', () => {
    expect(formatFigure(NaN, 2)).toBe('-');
    expect(formatFigure(null, 2)).toBe('-');
    expect(formatFigure(Infinity, 2)).toBe('inf');
    expect(formatFigure(3.14159, 2)).toBe('3.14');
  });
});

describe('CSV', () => {
  it('quotes as RFC 4180 section 2 says', () => {
    // RFC 4180 2.6: fields with commas, quotes or line breaks are enclosed in double quotes;
    // 2.7: a double quote inside is escaped by another double quote; 2.1: lines end in CRLF.
    expect(csvField('plain')).toBe('plain');
    expect(csvField('a,b')).toBe('"a,b"');
    expect(csvField('say "cheese"')).toBe('"say ""cheese"""');
    expect(csvField('two\nlines')).toBe('"two\nlines"');
    expect(csvField(null)).toBe('');
    expect(csvField(NaN)).toBe('');
    expect(
      toCsv(
        ['photo', 'psnr'],
        [
          ['x.jpg', 24.5],
          ['y,z.jpg', null],
        ],
      ),
    ).toBe('photo,psnr\r\nx.jpg,24.5\r\n"y,z.jpg",\r\n');
  });
});

describe('confidence histogram', () => {
  it('bins 8-bit values into equal ranges, worked by hand', () => {
    // 4 bins of 64 codes: 0 -> bin 0, 64 -> bin 1, 128 and 200 -> bin 2 and 3, 255 -> bin 3.
    expect(confidenceHistogram(new Uint8Array([0, 64, 128, 200, 255]), 1, 4)).toEqual([0.2, 0.2, 0.2, 0.4]);
    // Only the first channel of grey + alpha counts.
    expect(confidenceHistogram(new Uint8Array([0, 255, 255, 0]), 2, 2)).toEqual([0.5, 0.5]);
    expect(meanConfidenceOf(new Uint8Array([0, 255, 51]), 1)).toBeCloseTo(306 / 3 / 255, 12);
  });

  it('draws one bar per bin, the tallest bar filling the plot', () => {
    const svg = histogramSvg([0, 0.25, 0.75]);
    expect(svg.match(/<rect /g)).toHaveLength(3);
    expect(svg).toContain('height="0.0"'); // an empty bin has no bar
    expect(svg).toContain('height="40.0"'); // 56 px tall, 14 px axis, 2 px headroom
    expect(svg).toContain('75.0% of pixels');
  });

  it('escapes text for HTML', () => {
    expect(escapeHtml(`<a href="x">'&'</a>`)).toBe('&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;');
  });
});

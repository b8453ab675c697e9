import { Readable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { openCsv, parseDecimal } from '../../src/io/csv.js';
import { DataFileErrors, indexLabels, parseFeatures, planColumns, readLabelledCsv } from '../../src/io/feature-table.js';
import { tempDir } from '../helpers/datasets.js';

async function rowsOf(text: string): Promise<{ header: string[]; rows: Array<{ line: number; fields: string[] }> }> {
  const csv = await openCsv(Readable.from([Buffer.from(text)]), 'test.csv');
  const rows = [];
  for await (const r of csv.rows) rows.push(r);
  return { header: csv.header, rows };
}

describe('CSV reader (RFC 4180)', () => {
  it('reads quoted fields with commas, doubled quotes and line breaks, CRLF, and a BOM', async () => {
    const { header, rows } = await rowsOf('\ufeffa,b,c\r\n1,"x, y",3\r\n"4\r\n5","say ""hi""",6\r\n');
    expect(header).toEqual(['a', 'b', 'c']);
    expect(rows).toEqual([
      { line: 2, fields: ['1', 'x, y', '3'] },
      { line: 3, fields: ['4\r\n5', 'say "hi"', '6'] },
    ]);
  });

  it('numbers rows by the line they start on, counting line breaks inside quoted fields once each', async () => {
    for (const nl of ['\n', '\r\n', '\r']) {
      const text = ['a,b', '"x', 'y",1', '2,3', '', '4,5', ''].join(nl);
      const { rows } = await rowsOf(text);
      expect(rows.map((r) => r.line), JSON.stringify(nl)).toEqual([2, 4, 6]);
    }
  });

  it('gives the same records however the bytes are split into chunks, even inside a UTF-8 character or a CRLF', async () => {
    const text = Buffer.from('t,\u00b0C\r\n"a\r\nb",\u00e9t\u00e9\r\n1,2\r\n');
    const whole = await rowsOf(text.toString());
    const bytes = Array.from(text, (b) => Buffer.of(b));
    const csv = await openCsv(Readable.from(bytes), 'split.csv');
    const rows = [];
    for await (const r of csv.rows) rows.push(r);
    expect(csv.header).toEqual(whole.header);
    expect(rows).toEqual(whole.rows);
    expect(rows[0]!.fields[1]).toBe('\u00e9t\u00e9');
  });

  it('refuses a quote inside an unquoted field and text after a closing quote, naming the line', async () => {
    await expect(rowsOf('a,b\n1,2\n3,4"5\n')).rejects.toThrow(/test\.csv, line 3: a quote inside an unquoted field/);
    await expect(rowsOf('a,b\n"1"x,2\n')).rejects.toThrow(/line 2: unexpected "x" after a closing quote/);
  });

  it('skips blank lines and reads a last line without a line break', async () => {
    const { rows } = await rowsOf('a,b\n1,2\n\n3,4');
    expect(rows.map((r) => r.fields)).toEqual([
      ['1', '2'],
      ['3', '4'],
    ]);
  });

  it('passes a row of the wrong width on, for parseFeatures to report by its line', async () => {
    const { header, rows } = await rowsOf('a,b\n1,2\n3\n4,5\n');
    expect(rows.map((r) => r.fields)).toEqual([['1', '2'], ['3'], ['4', '5']]);
    const plan = planColumns(header, 'test.csv', {});
    expect(() => parseFeatures(rows[1]!.fields, rows[1]!.line, plan, 'test.csv', new Float64Array(2), 0)).toThrow(/^test\.csv, line 3: has 1 field, the header has 2$/);
  });

  it('keeps a record that is one quoted empty field, unlike a blank line', async () => {
    const { rows } = await rowsOf('a\n""\n\nx\n');
    expect(rows).toEqual([
      { line: 2, fields: [''] },
      { line: 4, fields: ['x'] },
    ]);
  });

  it('reports an unclosed quote at the line where it opens', async () => {
    await expect(rowsOf('a,b\n1,2\n1,"2\n3,4\n')).rejects.toThrow(/test\.csv, line 3: a quoted field opened here is never closed/);
  });

  it('refuses an empty file, an empty header field and a repeated column name', async () => {
    await expect(rowsOf('')).rejects.toThrow(/is empty; a header row is needed/);
    await expect(rowsOf('a,,c\n')).rejects.toThrow(/header field 2 is empty/);
    await expect(rowsOf('a,b,a\n')).rejects.toThrow(/column "a": column name appears twice/);
  });

  it('hashes every byte it reads', async () => {
    const text = 'a\n1\n';
    const csv = await openCsv(Readable.from([Buffer.from(text)]));
    for await (const _ of csv.rows);
    // sha256 of "a\n1\n" by GNU coreutils: printf 'a\n1\n' | sha256sum
    expect(csv.sha256()).toBe('309b0e45a73d3fc5325e2b6ed0a01ef8b9cde6b05a5633c1f893f970d52bfddc');
  });
});

describe('decimal fields', () => {
  it('accept plain decimals and exponents', () => {
    expect(['1', '-2.5', '+.5', '3.', '1e-3', ' 7 '].map(parseDecimal)).toEqual([1, -2.5, 0.5, 3, 0.001, 7]);
  });

  it('refuse what Number() would let through', () => {
    for (const bad of ['', '0x10', 'Infinity', 'NaN', '1,5', '1e', 'abc', '--1']) expect(typeof parseDecimal(bad)).toBe('string');
    expect(parseDecimal('1e999')).toMatch(/beyond the range/);
  });
});

describe('feature table', () => {
  it('picks feature columns by name and ignores the rest', () => {
    const plan = planColumns(['id', 'b', 'a', 'label'], 'f.csv', { features: ['a', 'b'], label: 'label' });
    expect(plan).toEqual({ featureNames: ['a', 'b'], featureIndex: [2, 1], labelIndex: 3, width: 4 });
  });

  it('names a missing column and lists what the header has', () => {
    expect(() => planColumns(['a', 'b'], 'f.csv', { features: ['a', 'c'] })).toThrow(/f\.csv, line 1, column "c": feature column not found; the header has "a", "b"/);
  });

  it('reports every bad row by line and column before training, and hints at a non-numeric column', async () => {
    const tmp = tempDir();
    try {
      const path = tmp.file('d.csv', 'id,x,y,label\nA1,1,2,ok\nA2,1,oops,ok\nA3,,2,bad\n');
      const err = await readLabelledCsv(path, { label: 'label' }).catch((e: unknown) => e);
      expect(err).toBeInstanceOf(DataFileErrors);
      const message = (err as Error).message;
      expect(message).toMatch(/3 bad rows/);
      expect(message).toMatch(/line 4, column "id": is "A3", not a number/);
      expect(message).toMatch(/column "id" holds no numbers; name it in --ignore, or list the feature columns with --features, to leave it out/);
      // with --ignore it is left out, and the other bad rows remain
      const ignored = await readLabelledCsv(path, { label: 'label', ignore: ['id'] }).catch((e: unknown) => e);
      expect((ignored as Error).message).toMatch(/^2 bad rows/);
      const picked = await readLabelledCsv(path, { label: 'label', features: ['x', 'y'] }).catch((e: unknown) => e);
      expect((picked as Error).message).toMatch(/^2 bad rows/);
      expect((picked as Error).message).toMatch(/line 3, column "y": is "oops", not a number/);
      expect((picked as Error).message).toMatch(/line 4, column "x": is empty/);
      expect((picked as Error).message).not.toMatch(/holds no numbers/);
    } finally {
      tmp.remove();
    }
  });

  it('orders classes numerically when all labels are numbers, else by code unit', () => {
    expect(indexLabels(['10', '9', '10', '1']).classes).toEqual(['1', '9', '10']);
    expect(indexLabels(['b', 'B', 'a'])).toEqual({ classes: ['B', 'a', 'b'], indices: Int32Array.of(2, 0, 1) });
  });
});

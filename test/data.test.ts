import { execFileSync, spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import {
  describeRepeats,
  findRepeats,
  formatOf,
  parseDelimited,
  parseJson,
  parseNpy,
  readSample,
  sortedOrder,
  resolveColumns,
  selectTableColumns,
} from '../src/data/index.js';
import { parseDecimalBytes } from '../src/data/numbers.js';
import { rngFromSeed } from '../src/core/rng.js';
import { usageMessage } from './helpers/usage-error.js';

const fixtureDir = join(import.meta.dirname, 'fixtures', 'npy');
const tempDir = mkdtempSync(join(tmpdir(), 'hhat-data-'));
afterAll(() => rmSync(tempDir, { recursive: true, force: true }));

function writeTemp(name: string, content: string | Uint8Array): string {
  const path = join(tempDir, name);
  writeFileSync(path, content);
  return path;
}

const rows = (table: { sample: { n: number; dim: number; data: Float64Array } }): number[][] => {
  const out: number[][] = [];
  for (let i = 0; i < table.sample.n; i++) {
    out.push(Array.from(table.sample.data.subarray(i * table.sample.dim, (i + 1) * table.sample.dim)));
  }
  return out;
};

describe('decimal fields', () => {
  const read = (text: string): number => {
    const bytes = Buffer.from(text, 'latin1');
    return parseDecimalBytes(bytes, 0, bytes.length);
  };

  it('reads every decimal exactly as ECMAScript Number() does', () => {
    // Reference: ECMAScript StringToNumber, which V8 rounds correctly; both fast and slow paths are covered
    // (<= 15 significant digits with small exponents, and 16-20 digits or exponents beyond ±22).
    const fixed = [
      '0',
      '-0',
      '+0',
      '1',
      '-1.5',
      '.5',
      '5.',
      '0.1',
      '1e22',
      '1e23',
      '9007199254740993',
      '1.7976931348623157e308',
      '2e308',
      '4.9e-324',
      '2.2250738585072011e-308',
      '123456789012345',
      '1234567890123456',
      '0.30000000000000004',
      '000123.4500',
      '1E-7',
      '1e+5',
      '  42  ',
      '\t-3.25',
      '9007199254740992',
      '9007199254740991',
      '0.9007199254740993',
      '1234567890123456e-5',
      '-0.0000000000000001234567890123456',
    ];
    for (const text of fixed) expect(Object.is(read(text), Number(text)), text).toBe(true);
    const rng = rngFromSeed('decimal-fields');
    for (let trial = 0; trial < 20000; trial++) {
      const digits = 1 + Math.floor(rng() * 20);
      let mantissa = '';
      for (let d = 0; d < digits; d++) mantissa += String(Math.floor(rng() * 10));
      const point = Math.floor(rng() * (digits + 1));
      let text = `${mantissa.slice(0, point)}.${mantissa.slice(point)}`;
      if (text === '.') text = '0';
      if (rng() < 0.5) text = `-${text}`;
      if (rng() < 0.5) text += `e${Math.floor(rng() * 80) - 40}`;
      expect(Object.is(read(text), Number(text)), text).toBe(true);
    }
  });

  it('rejects what is not a plain decimal', () => {
    // Hand-made: forms Number() accepts or half-accepts that a data file should not contain.
    for (const text of ['', ' ', '.', '+', '-', 'e5', '1e', '1e+', '1.2.3', '0x10', '1_000', 'NaN', 'Infinity', '--1', '1,5', '1 2']) {
      expect(read(text), JSON.stringify(text)).toBeNaN();
    }
  });
});

describe('parseDelimited', () => {
  it('finds a header row and reads the numbers under it', () => {
    // Hand-made input; expected values typed by hand.
    const table = parseDelimited('x,y,z\n1,2.5,-3\n4e2,0.125,6\n', { delimiter: 'comma' });
    expect(table.columnNames).toEqual(['x', 'y', 'z']);
    expect(table.namedColumns).toBe(true);
    expect(table.headerLine).toBe(1);
    expect(rows(table)).toEqual([
      [1, 2.5, -3],
      [400, 0.125, 6],
    ]);
  });

  it('reads a file without a header, naming columns by position', () => {
    const table = parseDelimited('1,2\n3,4\n5,6\n', { delimiter: 'comma' });
    expect(table.namedColumns).toBe(false);
    expect(table.columnNames).toEqual(['column 1', 'column 2']);
    expect(rows(table)).toEqual([
      [1, 2],
      [3, 4],
      [5, 6],
    ]);
  });

  it('accepts quoted header fields per RFC 4180 (delimiters, doubled quotes and line breaks inside quotes)', () => {
    // RFC 4180 section 2, rules 5-7: fields may be enclosed in double quotes; inside them commas, line
    // breaks and "" (one literal quote) may appear. The line break inside the quoted name makes the data
    // row start on line 3, which the ragged-row message must count.
    const text = '"mass, kg","say ""hi""","two\nlines"\n1,2,3\n4,5\n';
    const message = usageMessage(() => parseDelimited(text, { source: 'q.csv', delimiter: 'comma' }));
    expect(message).toBe('q.csv line 4 has 2 fields; the first data row (line 3) has 3');
    const table = parseDelimited('"mass, kg","say ""hi""","two\nlines"\n1,2,3\n', { delimiter: 'comma' });
    expect(table.columnNames).toEqual(['mass, kg', 'say "hi"', 'two\nlines']);
    expect(rows(table)).toEqual([[1, 2, 3]]);
  });

  it('reads quoted numbers as numbers (RFC 4180 allows any field to be quoted)', () => {
    expect(rows(parseDelimited('"1.5","2"\n"3",4\n', { delimiter: 'comma' }))).toEqual([
      [1.5, 2],
      [3, 4],
    ]);
  });

  it('accepts a UTF-8 byte order mark, CRLF line ends, comment lines and trailing blank lines', () => {
    // Hand-made: what spreadsheet exports on Windows look like (BOM + CRLF), plus comments anywhere.
    const text = '\uFEFF# exported\r\nx,y\r\n# a note\r\n1,2\r\n3,4\r\n\r\n  \r\n\r\n';
    const table = parseDelimited(text, { delimiter: 'comma' });
    expect(table.columnNames).toEqual(['x', 'y']);
    expect(rows(table)).toEqual([
      [1, 2],
      [3, 4],
    ]);
    // Same from bytes rather than a string.
    expect(rows(parseDelimited(Buffer.from(text, 'utf8'), { delimiter: 'comma' }))).toEqual([
      [1, 2],
      [3, 4],
    ]);
  });

  it('accepts old Mac CR line ends, and skips a header written as a comment as numpy.savetxt does', () => {
    expect(rows(parseDelimited('1,2\r3,4\r', { delimiter: 'comma' }))).toEqual([
      [1, 2],
      [3, 4],
    ]);
    const savetxt = parseDelimited('# x y\n1.000000000000000000e+00 2.500000000000000000e-01\n');
    expect(savetxt.namedColumns).toBe(false);
    expect(rows(savetxt)).toEqual([[1, 0.25]]);
  });

  it('reads a last line without a line end, and spaces around fields', () => {
    expect(rows(parseDelimited('a, b\n 1 , 2\n3,4', { delimiter: 'comma' }))).toEqual([
      [1, 2],
      [3, 4],
    ]);
  });

  it('guesses tab, semicolon, comma or runs of spaces when no delimiter is given', () => {
    // Hand-made: one file per delimiter; the guess must split each into the same numbers.
    const expected = [
      [1, 2, 3],
      [4, 5, 6],
    ];
    const cases: Array<[string, string]> = [
      ['tab', 'a\tb\tc\n1\t2\t3\n4\t5\t6\n'],
      ['semicolon', 'a;b;c\n1;2;3\n4;5;6\n'],
      ['comma', 'a,b,c\n1,2,3\n4,5,6\n'],
      ['spaces', '  a   b  c\n 1  2   3\n4 5 6   \n'],
    ];
    for (const [delimiter, text] of cases) {
      const table = parseDelimited(text);
      expect(table.delimiter, delimiter).toBe(delimiter);
      expect(rows(table), delimiter).toEqual(expected);
      expect(table.columnNames, delimiter).toEqual(['a', 'b', 'c']);
    }
    // A quoted name holding a comma must not make a tab-separated file look comma-separated.
    expect(parseDelimited('"a,b"\tc\n1\t2\n').delimiter).toBe('tab');
    // One column has no delimiter at all.
    expect(rows(parseDelimited('0.5\n1.5\n'))).toEqual([[0.5], [1.5]]);
  });

  it('treats a first row with any number in it as data, so a typo is reported rather than a row lost', () => {
    const message = usageMessage(() => parseDelimited('1,abc,3\n4,5,6\n', { source: 'd.csv', delimiter: 'comma' }));
    expect(message).toContain('d.csv line 1, column 2: "abc" is not a number');
    expect(message).toContain('header only when none of its fields is a number');
  });

  it('recognises a header with an empty name, as pandas writes for an unnamed index', () => {
    const table = parseDelimited(',x\n0,1.5\n1,2.5\n', { delimiter: 'comma' });
    expect(table.columnNames).toEqual(['column 1', 'x']);
    expect(rows(table)).toEqual([
      [0, 1.5],
      [1, 2.5],
    ]);
  });

  it('selects columns by name, position and range before reading, so text columns may be left out', () => {
    const text = 'id,x,y,z\ns1,1,2,3\ns2,4,5,6\n';
    const byName = parseDelimited(text, { delimiter: 'comma', columns: 'z,x' });
    expect(byName.columnNames).toEqual(['z', 'x']);
    expect(byName.columnNumbers).toEqual([4, 2]);
    expect(rows(byName)).toEqual([
      [3, 1],
      [6, 4],
    ]);
    expect(rows(parseDelimited(text, { delimiter: 'comma', columns: '2-3' }))).toEqual([
      [1, 2],
      [4, 5],
    ]);
    expect(rows(parseDelimited(text, { delimiter: 'comma', columns: '4, y' }))).toEqual([
      [3, 2],
      [6, 5],
    ]);
  });

  describe('errors name the line, the column and what is allowed', () => {
    const csv = (text: string, columns?: string): string => usageMessage(() => parseDelimited(text, { source: 'data.csv', delimiter: 'comma', columns }));

    it('non-finite values and missing-value markers', () => {
      // The brief's example message: data.csv line 17, column 2: "NaN" is not a finite number.
      const lines = ['x,y'];
      for (let i = 0; i < 15; i++) lines.push(`${i},${i / 2}`);
      lines.push('15,NaN');
      expect(csv(`${lines.join('\n')}\n`)).toMatch(/^data\.csv line 17, column 2 \("y"\): "NaN" is not a finite number/);
      for (const marker of ['inf', '-Infinity', 'NA', 'n/a', 'null']) {
        expect(csv(`1,2\n3,${marker}\n`), marker).toMatch(new RegExp(`^data\\.csv line 2, column 2: "${marker.replace('/', '\\/')}" is not a finite number`));
      }
      expect(csv('1,2\n3,1e999\n')).toBe('data.csv line 2, column 2: "1e999" is not a finite number (it overflows a double)');
    });

    it('empty fields', () => {
      expect(csv('1,2\n3,\n')).toMatch(/^data\.csv line 2, column 2: the field is empty; every value must be a finite number/);
      expect(csv('1,2\n,4\n')).toMatch(/^data\.csv line 2, column 1: the field is empty/);
    });

    it('text in a numeric column, with a hint to leave text columns out', () => {
      const message = csv('name,x\nalpha,1\nbeta,2\n');
      expect(message).toMatch(/^data\.csv line 2, column 1 \("name"\): "alpha" is not a number; expected a decimal/);
      expect(message).toContain('--columns 2');
      expect(csv('x\n1.5\n2,5\n', undefined)).toContain('line 3 has 2 fields');
      expect(usageMessage(() => parseDelimited('x;y\n1,5;2\n', { source: 'eu.txt' }))).toContain('decimal commas are not read');
    });

    it('ragged rows', () => {
      // The brief's example: data.csv line 9 has 2 fields; the first data row has 3.
      const lines = ['a,b,c'];
      for (let i = 0; i < 7; i++) lines.push('1,2,3');
      lines.push('1,2');
      expect(csv(lines.join('\n'))).toBe('data.csv line 9 has 2 fields; the first data row (line 2) has 3');
      expect(csv('a,b\n1,2,3\n')).toBe('data.csv line 2 has 3 fields; the header (line 1) has 2');
    });

    it('empty file, header only, comments only, blank line inside the data', () => {
      expect(csv('')).toBe('data.csv is empty; expected rows of numbers, optionally below a header row');
      expect(csv('\n \n')).toContain('data.csv is empty');
      expect(csv('x,y\n\n')).toBe('data.csv has a header row (line 1) but no data rows; expected rows of numbers below it');
      expect(csv('# only a note\n')).toContain('data.csv has no data rows, only comment lines');
      expect(csv('1,2\n\n3,4\n')).toMatch(/^data\.csv line 2 is blank; blank lines are allowed only before the first row and at the end/);
    });

    it('broken quoting', () => {
      expect(csv('"x,y\n1,2\n')).toMatch(/^data\.csv line 1, column 1: a quoted field is never closed/);
      expect(csv('"x"y,z\n1,2\n')).toMatch(/^data\.csv line 1, column 1: text follows a closing quote/);
    });

    it('unknown column names and positions out of range', () => {
      expect(csv('x,y,w\n1,2,3\n', '5')).toBe('data.csv: column 5 does not exist; the file has 3 columns');
      expect(csv('x,y,w\n1,2,3\n', 'z')).toBe('data.csv: no column named "z"; the columns are "x", "y", "w"');
      expect(csv('1,2,3\n', 'x')).toContain('the file has no header row, so select columns by position');
    });

    it('binary content and UTF-16 text', () => {
      expect(usageMessage(() => parseDelimited(Buffer.from('\uFEFF1,2\n', 'utf16le'), { source: 'w.csv' }))).toBe(
        'w.csv is UTF-16 text; save it as UTF-8 (or plain ASCII) text',
      );
      expect(usageMessage(() => parseDelimited(new Uint8Array([0x93, 0x4e, 0, 1, 2]), { source: 'a.csv' }))).toContain('a.csv contains zero bytes');
    });
  });
});

describe('resolveColumns', () => {
  const names = ['x', 'y', 'w', 'x2'];
  it('reads positions (from 1), ranges and names, in the order written', () => {
    // Hand-made against the documented grammar.
    expect(resolveColumns('1,3', names, 4, 'f')).toEqual([0, 2]);
    expect(resolveColumns('2-4', names, 4, 'f')).toEqual([1, 2, 3]);
    expect(resolveColumns('w, x', names, 4, 'f')).toEqual([2, 0]);
    expect(resolveColumns('x2,1', names, 4, 'f')).toEqual([3, 0]);
    expect(resolveColumns(' 2 - 3 ', null, 3, 'f')).toEqual([1, 2]);
  });

  it('rejects bad selections with the allowed range or names', () => {
    expect(usageMessage(() => resolveColumns('0', names, 4, 'f'))).toBe('f: column 0 does not exist; columns are numbered from 1');
    expect(usageMessage(() => resolveColumns('2-9', names, 4, 'f'))).toBe('f: column 9 does not exist; the file has 4 columns');
    expect(usageMessage(() => resolveColumns('4-2', names, 4, 'f'))).toContain('runs backwards; write 2-4');
    expect(usageMessage(() => resolveColumns('1,x', names, 4, 'f'))).toContain('selects column 1 twice');
    expect(usageMessage(() => resolveColumns('1,,2', names, 4, 'f'))).toContain('has an empty part');
    expect(usageMessage(() => resolveColumns('X', names, 4, 'f'))).toContain('(did you mean "x"?)');
    expect(usageMessage(() => resolveColumns('a', ['a', 'b', 'a'], 3, 'f'))).toContain('columns 1 and 3 share it');
  });
});

describe('parseJson', () => {
  it('reads the accepted shapes to the same sample', () => {
    // Hand-made: one 3 × 2 table written four ways.
    const expected = [
      [1, 2],
      [3.5, -4],
      [5e-3, 6],
    ];
    const rowsForm = parseJson('[[1,2],[3.5,-4],[5e-3,6]]');
    expect(rows(rowsForm)).toEqual(expected);
    expect(rowsForm.namedColumns).toBe(false);
    const columnsForm = parseJson('{"x":[1,3.5,5e-3],"y":[2,-4,6]}');
    expect(rows(columnsForm)).toEqual(expected);
    expect(columnsForm.columnNames).toEqual(['x', 'y']);
    const records = parseJson('[{"x":1,"y":2},{"y":-4,"x":3.5},{"x":5e-3,"y":6}]');
    expect(rows(records)).toEqual(expected);
    expect(rows(parseJson('\uFEFF [1, 2.5, -3] '))).toEqual([[1], [2.5], [-3]]);
    expect(rows(parseJson('{"label":["a","b","c"],"x":[1,3.5,5e-3],"y":[2,-4,6]}', { columns: 'x,y' }))).toEqual(expected);
    expect(rows(parseJson(Buffer.from('[[1,2],[3,4]]'), { columns: '2' }))).toEqual([[2], [4]]);
  });

  it('reports syntax errors with line and column', () => {
    // Positions counted by hand in each input (lines and columns from 1).
    const json = (text: string, columns?: string): string => usageMessage(() => parseJson(text, { source: 'd.json', columns }));
    expect(json('[1,\n 2,\n NaN]')).toBe('d.json line 3, column 2: invalid JSON: NaN is not valid JSON and not a finite number; remove or impute the value');
    expect(json('[1 2]')).toBe("d.json line 1, column 4: invalid JSON: expected ',' or ']' after an array element");
    expect(json('{"x": [1, 2],}')).toBe('d.json line 1, column 14: invalid JSON: a trailing comma is not allowed');
    expect(json('[1, 2')).toBe('d.json line 1, column 6: invalid JSON: the text ends inside an array');
    expect(json("{'x': [1]}")).toBe('d.json line 1, column 2: invalid JSON: expected a quoted key');
    expect(json('[1] x')).toBe('d.json line 1, column 5: invalid JSON: unexpected text after the end of the JSON value');
  });

  it('reports bad content with the row, the index and what is allowed', () => {
    const json = (text: string, columns?: string): string => usageMessage(() => parseJson(text, { source: 'd.json', columns }));
    expect(json('[1, [2, 3]]')).toBe(
      'd.json row 2 (index [1]) is an array but row 1 is a number; use either an array of numbers or an array of rows, not both',
    );
    expect(json('[[1], 2]')).toContain('d.json row 2 (index [1]) is a number but row 1 is an array');
    expect(json('[1, null, 3]')).toBe('d.json row 2 (index [1]): null is not a finite number; remove or impute missing values');
    expect(json('[[1,2],[3,"4"]]')).toBe('d.json row 2, column 2 (index [1][1]): "4" is a string; values must be JSON numbers, without quotes');
    expect(json('[[1,2],[3,4],[5]]')).toBe('d.json row 3 (index [2]) has 1 value; the first row has 2');
    expect(json('{"x":[1,2],"y":[1]}')).toBe('d.json column "y" has 1 value; column "x" has 2');
    expect(json('{"x":[1,null]}')).toBe('d.json column 1 ("x"), row 2 (index ["x"][1]): null is not a finite number; remove or impute missing values');
    expect(json('[1e999]')).toContain('not a finite number (it overflows a double)');
    expect(json('[]')).toContain('d.json holds an empty array; expected an array of numbers, an array of equal-length rows');
    expect(json('  ')).toContain('d.json is empty');
    expect(json('"text"')).toContain('d.json holds a string at the top level');
    expect(json('[{"x":1},{"y":2}]')).toBe('d.json row 2 (index [1]) has no key "x"; the first row has it');
    expect(json('{"x":[1]}', 'y')).toBe('d.json: no column named "y"; the columns are "x"');
  });
});

interface NpyExpectation {
  dtype: string;
  shape: number[];
  fortran_order: boolean;
  version: string;
  values: number[];
}
const npyExpected = JSON.parse(readFileSync(join(fixtureDir, 'expected.json'), 'utf8')) as {
  numpy_version: string;
  readable: Record<string, NpyExpectation>;
  rejected: Record<string, { dtype: string; shape: number[]; first_nonfinite?: number[] }>;
};

describe('parseNpy on files written by NumPy', () => {
  const load = (name: string, columns?: string) => parseNpy(readFileSync(join(fixtureDir, `${name}.npy`)), { source: `${name}.npy`, columns });

  it('covers the header versions, orders and dtypes the brief lists', () => {
    const cases = Object.values(npyExpected.readable);
    expect(new Set(cases.map((c) => c.version))).toEqual(new Set(['1.0', '2.0', '3.0']));
    expect(cases.some((c) => c.fortran_order)).toBe(true);
    for (const dtype of ['<f8', '>f8', '<f4', '>f4', '<i4', '<i8', '|u1']) {
      expect(
        cases.map((c) => c.dtype),
        dtype,
      ).toContain(dtype);
    }
  });

  for (const [name, expected] of Object.entries(npyExpected.readable)) {
    it(`${name}: ${expected.dtype} shape (${expected.shape.join(',')})${expected.fortran_order ? ' fortran' : ''} v${expected.version}`, () => {
      // Reference: the float64 values NumPy reports for the same file (expected.json, same script).
      const table = load(name);
      expect(table.dtype).toBe(expected.dtype);
      expect(table.shape).toEqual(expected.shape);
      expect(table.version).toBe(expected.version);
      expect(table.sample.n).toBe(expected.shape[0]);
      expect(table.sample.dim).toBe(expected.shape.length === 2 ? expected.shape[1] : 1);
      expect(table.sample.data.length).toBe(expected.values.length);
      // Object.is also tells -0 from 0, which NumPy wrote in f8_le_1d.
      expected.values.forEach((value, i) => expect(Object.is(table.sample.data[i], value), `${name}[${i}]`).toBe(true));
    });
  }

  it('selects columns of a Fortran-ordered array', () => {
    // Reference: expected.json row-major values of f8_fortran_2d (shape 3 × 4), columns 4 and 2.
    const expected = npyExpected.readable.f8_fortran_2d.values;
    const table = load('f8_fortran_2d', '4,2');
    expect(rows(table)).toEqual([0, 1, 2].map((i) => [expected[i * 4 + 3], expected[i * 4 + 1]]));
  });

  it('rejects non-finite values, naming the index NumPy reports', () => {
    // Reference: first_nonfinite is numpy.argwhere(~isfinite(a))[0] for the same array.
    const nan = npyExpected.rejected.f8_nan_2d.first_nonfinite!;
    expect(usageMessage(() => load('f8_nan_2d'))).toBe(
      `f8_nan_2d.npy row ${nan[0] + 1}, column ${nan[1] + 1} (index [${nan[0]}, ${nan[1]}]): NaN is not a finite number; remove or impute missing and infinite values`,
    );
    const inf = npyExpected.rejected.f4_inf_1d.first_nonfinite!;
    expect(usageMessage(() => load('f4_inf_1d'))).toMatch(
      new RegExp(`^f4_inf_1d\\.npy row ${inf[0] + 1} \\(index \\[${inf[0]}\\]\\): Infinity is not a finite number`),
    );
  });

  it('rejects dtypes it does not read, naming the dtype and the allowed ones', () => {
    for (const name of ['bool_1d', 'c16_1d', 'str_1d']) {
      const message = usageMessage(() => load(name));
      expect(message, name).toContain(`has dtype "${npyExpected.rejected[name].dtype}", which is not read; allowed: floats <f8 >f8 <f4 >f4`);
    }
    expect(usageMessage(() => load('structured_1d'))).toContain('structured array');
  });

  it('rejects shapes other than 1-D and 2-D, and empty arrays', () => {
    expect(usageMessage(() => load('f8_3d'))).toBe(
      'f8_3d.npy holds a 3-dimensional array (shape (2, 2, 2)); expected 1-D (one column) or 2-D (rows × columns)',
    );
    expect(usageMessage(() => load('f8_0d'))).toContain('holds a 0-dimensional array');
    expect(usageMessage(() => load('f8_empty'))).toContain('holds an empty array (shape (0,))');
  });

  it('rejects a bad magic string, an unknown version, a cut-short file and a damaged header', () => {
    const good = readFileSync(join(fixtureDir, 'f8_be_2d.npy'));
    const npy = (bytes: Uint8Array): string => usageMessage(() => parseNpy(bytes, { source: 'a.npy' }));
    expect(npy(Buffer.from('x,y\n1,2\n'))).toContain('a.npy is not a NumPy .npy file: it does not start with the bytes \\x93NUMPY');
    const version9 = Buffer.from(good);
    version9[6] = 9;
    expect(npy(version9)).toBe('a.npy: .npy format version 9.0 is not supported; versions 1.0, 2.0 and 3.0 are');
    expect(npy(good.subarray(0, good.length - 8))).toBe('a.npy is cut short: shape (4, 3) of >f8 needs 96 data bytes, the file has 88');
    expect(npy(good.subarray(0, 40))).toContain('ends inside its header');
    const damaged = Buffer.from(good.toString('latin1').replace("'shape'", "'shope'"), 'latin1');
    expect(npy(damaged)).toContain("the .npy header has no 'shape' tuple");
  });

  it('records the NumPy version that wrote the fixtures', () => {
    expect(npyExpected.numpy_version).toMatch(/^\d+\.\d+/);
  });
});

describe('readSample', () => {
  // Found by a tester: a Latin-1 header ("été") was read as "\uFFFDt\uFFFD" without a word.
  it('refuses a header that is not valid UTF-8, and reads the same names in UTF-8', () => {
    const latin = join(tempDir, 'latin.csv');
    writeFileSync(latin, Buffer.from([0xe9, 0x74, 0xe9, 0x2c, 0x79, 0x0a, 0x31, 0x2c, 0x32, 0x0a]));
    expect(() => readSample(latin)).toThrow(/latin\.csv line 1: the header name ".t." is not valid UTF-8/);
    expect(readSample(writeTemp('utf8.csv', 'été,y\n1,2\n')).columnNames).toEqual(['été', 'y']);
  });

  // Found by a tester: hhat's own draw JSON was rejected key by key ("kind" holds a string).
  it("names hhat's own JSON records (a draw, a run) as not samples", () => {
    expect(() => readSample(writeTemp('draw.json', '{"kind": "hhat-draw", "version": 1, "samples": []}'))).toThrow(
      /is a record written by hhat draw; .*--out FILE\.csv/,
    );
    expect(() => readSample(writeTemp('run.json', '{"schemaVersion": 2, "kind": "hhat-run"}'))).toThrow(/is an hhat run file, not a sample/);
  });

  // Found by a tester: a stacked draw was read as one 2-D sample, its replicate index a coordinate.
  it("refuses hhat draw's stacked replicates as one sample, unless the columns are named", () => {
    const path = writeTemp('stacked.csv', 'replicate,x1\n0,0.5\n0,1.5\n1,-0.25\n1,2\n');
    expect(() => readSample(path)).toThrow(/its first column is "replicate".*name the data columns with --columns/);
    expect(rows(readSample(path, { columns: 'x1' }))).toEqual([[0.5], [1.5], [-0.25], [2]]);
    // A lone column of that name is data like any other.
    expect(rows(readSample(writeTemp('lone.csv', 'replicate\n1\n2\n')))).toEqual([[1], [2]]);
  });

  // Found by hand: such a file was read as its first byte alone ("32768" as 3), its size being 0.
  it.runIf(existsSync('/proc/sys/kernel/pid_max'))('reads a file whose size says 0 but which has bytes (/proc) to its end', () => {
    const text = readFileSync('/proc/sys/kernel/pid_max', 'utf8');
    const sample = readSample('/proc/sys/kernel/pid_max', { format: 'text' });
    expect(rows(sample)).toEqual([[Number(text.trim())]]);
    // A truly empty file keeps its format's own line.
    expect(() => readSample(writeTemp('empty.csv', ''))).toThrow(/empty\.csv is empty; expected rows of numbers/);
  });

  it('reads each format from a file, choosing the parser by extension', () => {
    // Hand-made: the same 2 × 2 table in every format; the .npy copy is NumPy's f8_column_2d fixture.
    const expected = [
      [1, 2],
      [3, 4],
    ];
    const csv = readSample(writeTemp('t.csv', 'a,b\n1,2\n3,4\n'));
    expect(csv.format).toBe('csv');
    expect(csv.source).toBe(join(tempDir, 't.csv'));
    expect(rows(csv)).toEqual(expected);
    expect(rows(readSample(writeTemp('t.tsv', 'a\tb\n1\t2\n3\t4\n')))).toEqual(expected);
    const txt = readSample(writeTemp('t.TXT', '# comment\n1 2\n3 4\n'));
    expect(txt.format).toBe('text');
    expect(txt.delimiter).toBe('spaces');
    expect(rows(txt)).toEqual(expected);
    expect(rows(readSample(writeTemp('t.dat', '1;2\n3;4\n')))).toEqual(expected);
    expect(rows(readSample(writeTemp('t.json', '[[1,2],[3,4]]')))).toEqual(expected);
    const npyPath = writeTemp('t.npy', readFileSync(join(fixtureDir, 'f8_column_2d.npy')));
    const npy = readSample(npyPath, { columns: '1' });
    expect(npy.format).toBe('npy');
    expect(Array.from(npy.sample.data)).toEqual(npyExpected.readable.f8_column_2d.values);
    expect(rows(readSample(writeTemp('t.csv', 'a,b\n1,2\n3,4\n'), { columns: 'b' }))).toEqual([[2], [4]]);
    expect(rows(readSample(writeTemp('weird.data', '[[1,2],[3,4]]'), { format: 'json' }))).toEqual(expected);
  });

  it('a .csv file is split at commas even when it holds tabs, and the message says so', () => {
    // "1<tab>2" is one text field when split at commas, so line 1 reads as a header and line 2 fails.
    const message = usageMessage(() => readSample(writeTemp('tabs.csv', '1\t2\n3\t4\n')));
    expect(message).toContain('tabs.csv line 2, column 1 ("1\\t2"): "3\\t4" is not a number');
    expect(message).toContain('fields are split at commas; this row contains tabs');
  });

  it('names the file and the reason when it cannot be read, and lists the allowed extensions', () => {
    const missing = join(tempDir, 'absent.csv');
    expect(usageMessage(() => readSample(missing))).toBe(`cannot read data file ${missing}: no such file`);
    const directory = join(tempDir, 'folder.csv');
    mkdirSync(directory, { recursive: true });
    expect(usageMessage(() => readSample(directory))).toBe(`cannot read data file ${directory}: it is a directory`);
    expect(usageMessage(() => readSample(tempDir))).toBe(`cannot read data file ${tempDir}: it is a directory`);
    expect(usageMessage(() => readSample('data.xlsx'))).toBe('data.xlsx has extension ".xlsx"; allowed: .csv, .tsv, .tab, .txt, .dat, .json, .npy');
    expect(usageMessage(() => formatOf('data'))).toContain('data has no extension; allowed: .csv');
  });

  it('a device or pipe is read only as far as its bytes can be the format: /dev/zero is refused, not read forever', () => {
    for (const [name, message] of [
      ['zero.npy', 'is not a NumPy .npy file: it does not start with the bytes \\x93NUMPY'],
      ['zero.json', 'line 1, column 1: invalid JSON'],
      ['zero.csv', 'contains zero bytes: it looks like a binary file, not delimited text'],
    ]) {
      const link = join(tempDir, name);
      symlinkSync('/dev/zero', link);
      expect(usageMessage(() => readSample(link))).toContain(message);
    }
  });

  it('a .npy on a pipe followed by endless bytes is read to where its header says the array ends', () => {
    const fifo = join(tempDir, 'endless.npy');
    execFileSync('mkfifo', [fifo]);
    const npy = join(fixtureDir, 'f8_column_2d.npy');
    // The writer adds zeros after the array until the reader closes the pipe (then it dies of SIGPIPE).
    const writer = spawn('sh', ['-c', `cat "${npy}" /dev/zero > "${fifo}"`], { stdio: 'ignore' });
    try {
      expect(rows(readSample(fifo))).toEqual(rows(readSample(writeTemp('plain.npy', readFileSync(npy)))));
    } finally {
      writer.kill();
    }
  });

  it('a name without an extension has its format read from its first bytes, as standard input does', () => {
    // Hand-made: the same 2 × 2 table as above; the .npy bytes are NumPy's f8_column_2d fixture.
    const expected = [
      [1, 2],
      [3, 4],
    ];
    const text = readSample(writeTemp('samples', '# x y\n1 2\n3 4\n'));
    expect([text.format, text.delimiter]).toEqual(['text', 'spaces']);
    expect(rows(text)).toEqual(expected);
    const commas = readSample(writeTemp('samples-commas', 'a,b\n1,2\n3,4\n'));
    expect([commas.format, commas.delimiter, commas.columnNames]).toEqual(['text', 'comma', ['a', 'b']]);
    expect(readSample(writeTemp('samples-json', ' \n[[1,2],[3,4]]')).format).toBe('json');
    const npy = readSample(writeTemp('samples-npy', readFileSync(join(fixtureDir, 'f8_column_2d.npy'))), { columns: '1' });
    expect(npy.format).toBe('npy');
    expect(Array.from(npy.sample.data)).toEqual(npyExpected.readable.f8_column_2d.values);
  });

  it('a named pipe, with or without an extension, is read once and parsed whole (a positioned read would fail on it)', () => {
    for (const name of ['piped.csv', 'piped']) {
      const fifo = join(tempDir, name);
      execFileSync('mkfifo', [fifo]);
      const writer = spawn('sh', ['-c', `printf 'a,b\\n1,2\\n3,4\\n' > "${fifo}"`], { stdio: 'ignore' });
      try {
        const loaded = readSample(fifo);
        expect(rows(loaded)).toEqual([
          [1, 2],
          [3, 4],
        ]);
        expect(loaded.format).toBe(name === 'piped' ? 'text' : 'csv');
      } finally {
        writer.kill();
      }
    }
    const empty = join(tempDir, 'empty-pipe');
    execFileSync('mkfifo', [empty]);
    const writer = spawn('sh', ['-c', `: > "${empty}"`], { stdio: 'ignore' });
    try {
      expect(usageMessage(() => readSample(empty))).toBe(`${empty} is empty; it holds no sample (CSV/TSV/TXT, JSON or NumPy .npy)`);
    } finally {
      writer.kill();
    }
  });

  it('passes the path into parse errors', () => {
    const path = writeTemp('bad.json', '[1, 2,, 3]');
    expect(usageMessage(() => readSample(path))).toBe(`${path} line 1, column 7: invalid JSON: unexpected "," where a value was expected`);
  });
});

describe('selectTableColumns', () => {
  it('selects from an already-read table', () => {
    const table = parseJson('{"x":[1,2],"y":[3,4],"z":[5,6]}');
    const selected = selectTableColumns(table, 'z,1', 'd.json');
    expect(selected.columnNames).toEqual(['z', 'x']);
    expect(rows(selected)).toEqual([
      [5, 1],
      [6, 2],
    ]);
  });
});

describe('findRepeats', () => {
  it('counts ties, groups, distinct values, gaps and repeated rows of a hand-made sample', () => {
    // Hand-counted: column 1 = [1, 2, 2, 3, 1, 1] has groups {1×3, 2×2, 3×1}; column 2 = [0.5, 0.5, 0.75, 0.5, 0.5, 2].
    // Rows (1,0.5) appear at 0 and 4, so one row repeats an earlier one.
    const data = Float64Array.from([1, 0.5, 2, 0.5, 2, 0.75, 3, 0.5, 1, 0.5, 1, 2]);
    const report = findRepeats({ n: 6, dim: 2, data });
    expect(report.repeatedRows).toBe(1);
    expect(report.columns[0]).toEqual({ distinct: 3, tiedValues: 5, largestGroup: 3, smallestGap: 1 });
    expect(report.columns[1]).toEqual({ distinct: 3, tiedValues: 4, largestGroup: 4, smallestGap: 0.25 });
    const lines = describeRepeats(report, ['x', 'y']);
    expect(lines[0]).toBe('1 of 6 rows repeats an earlier row exactly');
    expect(lines[1]).toBe('"x": 5 of 6 values are tied (largest group 3); 3 distinct; smallest gap 1.00');
  });

  it('treats -0 and 0 as one value, and reports no gap for a constant column', () => {
    const report = findRepeats({ n: 3, dim: 1, data: Float64Array.from([0, -0, 0]) });
    expect(report.columns[0]).toEqual({ distinct: 1, tiedValues: 3, largestGroup: 3, smallestGap: NaN });
    expect(report.repeatedRows).toBe(2);
  });

  it('orders values as the ECMAScript typed-array sort does, including -0, subnormals and huge values', () => {
    // Reference: %TypedArray%.prototype.sort without a comparator (numeric order, -0 before +0).
    const rng = rngFromSeed('sorted-order');
    const special = [0, -0, 5e-324, -5e-324, 1.7976931348623157e308, -1.7976931348623157e308, 1, -1, 2.5, 2.5];
    const values = Float64Array.from({ length: 5000 }, (_, i) => (i < special.length ? special[i] : (rng() - 0.5) * 10 ** Math.floor(rng() * 40 - 20)));
    const expected = Float64Array.from(values).sort();
    const order = sortedOrder(values);
    const reordered = Float64Array.from(order, (index) => values[index]);
    expect(reordered.every((value, i) => Object.is(value, expected[i]))).toBe(true);
    expect(new Set(order).size).toBe(values.length);
  });

  it('finds no repeated rows when one column is all distinct, whatever the later columns hold', () => {
    const data = Float64Array.from([1, 7, 7, 2, 7, 7, 3, 7, 7]);
    const report = findRepeats({ n: 3, dim: 3, data });
    expect(report.repeatedRows).toBe(0);
    expect(report.columns[2]).toEqual({ distinct: 1, tiedValues: 3, largestGroup: 3, smallestGap: NaN });
  });

  it('agrees with a brute-force pairwise count on rounded random data', () => {
    // Independent check: O(n^2) comparisons of every pair of values and rows.
    const rng = rngFromSeed('repeats-brute-force');
    const n = 300;
    const dim = 3;
    const data = new Float64Array(n * dim);
    for (let i = 0; i < data.length; i++) data[i] = Math.round(rng() * 6) / 4 - 0.5;
    const report = findRepeats({ n, dim, data });
    let repeatedRows = 0;
    for (let i = 0; i < n; i++) {
      for (let k = 0; k < i; k++) {
        let same = true;
        for (let j = 0; j < dim; j++) if (data[i * dim + j] !== data[k * dim + j]) same = false;
        if (same) {
          repeatedRows++;
          break;
        }
      }
    }
    expect(report.repeatedRows).toBe(repeatedRows);
    for (let j = 0; j < dim; j++) {
      let tied = 0;
      let gap = Infinity;
      const seen = new Set<number>();
      for (let i = 0; i < n; i++) {
        const value = data[i * dim + j];
        seen.add(value);
        let hasTwin = false;
        for (let k = 0; k < n; k++) {
          const other = data[k * dim + j];
          if (k !== i && other === value) hasTwin = true;
          if (other > value && other - value < gap) gap = other - value;
        }
        if (hasTwin) tied++;
      }
      expect(report.columns[j].tiedValues).toBe(tied);
      expect(report.columns[j].distinct).toBe(seen.size);
      expect(report.columns[j].smallestGap).toBe(gap);
    }
  });
});

/**
 * NumPy `.npy` to a sample, following the format description in NumPy's `numpy.lib.format` module
 * (NEP 1): magic `\x93NUMPY`, a major and minor version byte, a little-endian header length (2 bytes in
 * version 1.0, 4 bytes in 2.0 and 3.0), then a Python dict literal with `descr`, `fortran_order` and
 * `shape`, padded with spaces and ending in a newline; the array data follows. Version 3.0 differs from 2.0
 * only in the header being UTF-8 rather than Latin-1.
 *
 * A 1-D array is one column; a 2-D array is rows × columns. Fortran-ordered data is transposed to rows.
 * Floats and integers of any common width and either byte order are read, as doubles.
 */
import { UsageError } from '../core/errors.js';
import { resolveColumns } from './columns.js';
import { defaultSource, positionalNames, type DataTable, type ParseOptions } from './table.js';

export interface NpyTable extends DataTable {
  /** The array's dtype as the header wrote it, e.g. "<f8". */
  dtype: string;
  /** The array's shape as the header wrote it. */
  shape: number[];
  version: string;
}

const magic = [0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59]; // \x93NUMPY

const allowedDtypes = 'floats <f8 >f8 <f4 >f4 <f2 >f2, signed integers i1 i2 i4 i8 and unsigned u1 u2 u4 u8 (either byte order)';

type Reader = (view: DataView, offset: number) => number;

/** How to read one element of each supported kind, keyed by kind letter and size. */
function elementReader(kind: string, size: number, littleEndian: boolean): Reader | null {
  switch (`${kind}${size}`) {
    case 'f8':
      return (view, offset) => view.getFloat64(offset, littleEndian);
    case 'f4':
      return (view, offset) => view.getFloat32(offset, littleEndian);
    case 'f2':
      return (view, offset) => halfToNumber(view.getUint16(offset, littleEndian));
    case 'i1':
      return (view, offset) => view.getInt8(offset);
    case 'u1':
      return (view, offset) => view.getUint8(offset);
    case 'i2':
      return (view, offset) => view.getInt16(offset, littleEndian);
    case 'u2':
      return (view, offset) => view.getUint16(offset, littleEndian);
    case 'i4':
      return (view, offset) => view.getInt32(offset, littleEndian);
    case 'u4':
      return (view, offset) => view.getUint32(offset, littleEndian);
    // 64-bit integers beyond 2^53 round to the nearest double, as NumPy's astype(float64) does.
    case 'i8':
      return (view, offset) => Number(view.getBigInt64(offset, littleEndian));
    case 'u8':
      return (view, offset) => Number(view.getBigUint64(offset, littleEndian));
    default:
      return null;
  }
}

/** IEEE 754 binary16 to a double. */
function halfToNumber(bits: number): number {
  const sign = bits & 0x8000 ? -1 : 1;
  const exponent = (bits >> 10) & 0x1f;
  const fraction = bits & 0x3ff;
  if (exponent === 0) return sign * fraction * 2 ** -24;
  if (exponent === 31) return fraction === 0 ? sign * Infinity : NaN;
  return sign * (1 + fraction / 1024) * 2 ** (exponent - 15);
}

interface NpyHeader {
  descr: string;
  fortranOrder: boolean;
  shape: number[];
}

/** Reads the header dict literal; NumPy writes keys in a fixed form, but any order and spacing is accepted. */
function parseHeader(text: string, source: string): NpyHeader {
  const bad = (what: string): UsageError => new UsageError(`${source}: the .npy header ${what}; header text: ${JSON.stringify(text.trim().slice(0, 120))}`);
  const trimmed = text.trim();
  if (!trimmed.startsWith('{') || !trimmed.endsWith('}')) throw bad('is not a dict literal');
  const descrMatch = /['"]descr['"]\s*:\s*(['"])([^'"]*)\1/.exec(trimmed);
  if (!descrMatch) {
    if (/['"]descr['"]\s*:\s*\[/.test(trimmed)) {
      throw new UsageError(`${source} holds a structured array (fields with names); only plain numeric arrays are read: ${allowedDtypes}`);
    }
    throw bad("has no 'descr' string");
  }
  const orderMatch = /['"]fortran_order['"]\s*:\s*(True|False)/.exec(trimmed);
  if (!orderMatch) throw bad("has no 'fortran_order' True or False");
  const shapeMatch = /['"]shape['"]\s*:\s*\(([^)]*)\)/.exec(trimmed);
  if (!shapeMatch) throw bad("has no 'shape' tuple");
  const shape: number[] = [];
  for (const part of shapeMatch[1].split(',')) {
    const item = part.trim();
    if (item === '') continue;
    if (!/^\d+L?$/.test(item)) throw bad(`has a shape entry ${JSON.stringify(item)} that is not a whole number`);
    shape.push(Number.parseInt(item, 10));
  }
  return { descr: descrMatch[2], fortranOrder: orderMatch[1] === 'True', shape };
}

/**
 * The whole file's length in bytes as its header states it, from a prefix: null while the prefix ends inside the
 * header, or when it is no .npy or its header cannot say (parseNpy then names the problem). Lets a reader of a
 * pipe or device stop where the array ends instead of reading to an end that may never come.
 */
export function npyByteLength(prefix: Uint8Array): number | null {
  if (prefix.length < 12 || magic.some((byte, i) => prefix[i] !== byte)) return null;
  const major = prefix[6];
  if (major !== 1 && major !== 2 && major !== 3) return null;
  const view = new DataView(prefix.buffer, prefix.byteOffset, prefix.byteLength);
  const headerStart = major === 1 ? 10 : 12;
  const headerLength = major === 1 ? view.getUint16(8, true) : view.getUint32(8, true);
  if (prefix.length < headerStart + headerLength) return null;
  try {
    const text = Buffer.from(prefix.buffer, prefix.byteOffset + headerStart, headerLength).toString(major === 3 ? 'utf8' : 'latin1');
    const header = parseHeader(text, '');
    const size = /^[<>|=][a-zA-Z](\d+)$/.exec(header.descr);
    if (!size) return null;
    return headerStart + headerLength + header.shape.reduce((a, b) => a * b, 1) * Number(size[1]);
  } catch {
    return null;
  }
}

export function parseNpy(input: Uint8Array, options: ParseOptions = {}): NpyTable {
  const source = options.source ?? defaultSource;
  const bytes = input;
  if (bytes.length < 10 || magic.some((byte, i) => bytes[i] !== byte)) {
    throw new UsageError(`${source} is not a NumPy .npy file: it does not start with the bytes \\x93NUMPY (write it with numpy.save)`);
  }
  const major = bytes[6];
  const minor = bytes[7];
  const version = `${major}.${minor}`;
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  let headerLength: number;
  let headerStart: number;
  if (major === 1) {
    headerLength = view.getUint16(8, true);
    headerStart = 10;
  } else if (major === 2 || major === 3) {
    if (bytes.length < 12) throw new UsageError(`${source}: the .npy file ends inside its header`);
    headerLength = view.getUint32(8, true);
    headerStart = 12;
  } else {
    throw new UsageError(`${source}: .npy format version ${version} is not supported; versions 1.0, 2.0 and 3.0 are`);
  }
  const dataStart = headerStart + headerLength;
  if (dataStart > bytes.length) throw new UsageError(`${source}: the .npy file ends inside its header`);
  const headerText = Buffer.from(bytes.buffer, bytes.byteOffset + headerStart, headerLength).toString(major === 3 ? 'utf8' : 'latin1');
  const header = parseHeader(headerText, source);

  const dtypeMatch = /^([<>|=])([a-zA-Z])(\d+)$/.exec(header.descr);
  const reader = dtypeMatch
    ? elementReader(dtypeMatch[2], Number(dtypeMatch[3]), dtypeMatch[1] === '<' || (dtypeMatch[1] === '=' && isHostLittleEndian()))
    : null;
  if (!dtypeMatch || !reader) {
    throw new UsageError(`${source} has dtype ${JSON.stringify(header.descr)}, which is not read; allowed: ${allowedDtypes}`);
  }
  const itemSize = Number(dtypeMatch[3]);

  const shape = header.shape;
  if (shape.length === 0 || shape.length > 2) {
    throw new UsageError(
      `${source} holds a ${shape.length}-dimensional array (shape (${shape.join(', ')})); expected 1-D (one column) or 2-D (rows × columns)`,
    );
  }
  const n = shape[0];
  const columns = shape.length === 2 ? shape[1] : 1;
  if (n === 0 || columns === 0) {
    throw new UsageError(`${source} holds an empty array (shape (${shape.join(', ')}${shape.length === 1 ? ',' : ''})); expected at least one value`);
  }
  const count = n * columns;
  const needed = count * itemSize;
  if (bytes.length - dataStart < needed) {
    throw new UsageError(
      `${source} is cut short: shape (${shape.join(', ')}) of ${header.descr} needs ${needed} data bytes, the file has ${bytes.length - dataStart}`,
    );
  }

  const selected = options.columns === undefined ? Array.from({ length: columns }, (_, j) => j) : resolveColumns(options.columns, null, columns, source);
  const dim = selected.length;
  // NumPy's default, little-endian float64 in C order, every column: one copy of the bytes, then a finiteness scan.
  const wholeNative =
    dtypeMatch[2] === 'f' &&
    itemSize === 8 &&
    isHostLittleEndian() &&
    (dtypeMatch[1] === '<' || dtypeMatch[1] === '=') &&
    !header.fortranOrder &&
    selected.every((j, slot) => j === slot) &&
    dim === columns;
  const notFinite = (i: number, j: number, value: number): UsageError => {
    const index = shape.length === 2 ? `[${i}, ${j}]` : `[${i}]`;
    return new UsageError(
      `${source} row ${i + 1}${shape.length === 2 ? `, column ${j + 1}` : ''} (index ${index}): ${value} is not a finite number; remove or impute missing and infinite values`,
    );
  };
  let data: Float64Array;
  if (wholeNative) {
    data = new Float64Array(bytes.buffer.slice(bytes.byteOffset + dataStart, bytes.byteOffset + dataStart + needed));
    for (let e = 0; e < count; e++) if (data[e] - data[e] !== 0) throw notFinite(Math.floor(e / columns), e % columns, data[e]);
  } else {
    data = new Float64Array(n * dim);
    for (let slot = 0; slot < dim; slot++) {
      const j = selected[slot];
      for (let i = 0; i < n; i++) {
        // C order stores row i's elements together; Fortran order stores column j's.
        const element = header.fortranOrder ? j * n + i : i * columns + j;
        const value = reader(view, dataStart + element * itemSize);
        if (value - value !== 0) throw notFinite(i, j, value);
        data[i * dim + slot] = value;
      }
    }
  }
  const names = positionalNames(columns);
  return {
    sample: { n, dim, data },
    columnNames: selected.map((j) => names[j]),
    columnNumbers: selected.map((j) => j + 1),
    namedColumns: false,
    inputColumns: columns,
    dtype: header.descr,
    shape,
    version,
  };
}

function isHostLittleEndian(): boolean {
  return new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;
}

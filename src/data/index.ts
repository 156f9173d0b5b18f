/**
 * Reading the user's data: a file to a `Sample`, or one line saying what is wrong and what is allowed.
 *
 *   const { sample, columnNames } = readSample('trial.csv', { columns: 'x,y' });
 *
 * The format comes from the extension: .csv (commas), .tsv (tabs), .txt and .dat (delimiter guessed from
 * the first lines: tab, semicolon, comma, else runs of spaces), .json, and .npy. The path `-` is standard
 * input, whose format is read from its first bytes (sniffFormat). The parsers also work on strings and bytes:
 * `parseDelimited`, `parseJson`, `parseNpy`. See each module for the accepted forms.
 */
import { closeSync, fstatSync, openSync, readFileSync, readSync, statSync } from 'node:fs';
import { isatty } from 'node:tty';
import { extname } from 'node:path';
import { UsageError } from '../core/errors.js';
import { readFailureReason } from '../core/files.js';
import { parseDelimited, readDelimitedFile, type Delimiter } from './delimited.js';
import { parseJson } from './json.js';
import { parseNpy } from './npy.js';
import type { DataTable } from './table.js';

export { parseDelimited, readDelimitedFile, type Delimiter } from './delimited.js';
export { parseJson } from './json.js';
export { parseNpy } from './npy.js';
export { resolveColumns, selectTableColumns } from './columns.js';
export { findRepeats, describeRepeats, sortedOrder, type ColumnRepeats, type RepeatReport } from './repeats.js';
export type { DataTable } from './table.js';

export type DataFormat = 'csv' | 'tsv' | 'text' | 'json' | 'npy';

export interface ReadOptions {
  /** A column selection: "1,3", "2-4" or header names "x,y" (positions count from 1). */
  columns?: string;
  /** Overrides the format the extension implies. */
  format?: DataFormat;
  /** Hears the bytes read so far of a delimited text file, after each window (for a progress line). */
  onProgress?: (bytesRead: number, totalBytes: number) => void;
}

export interface LoadedSample extends DataTable {
  format: DataFormat;
  /** For delimited text, what fields were split at. */
  delimiter?: Delimiter;
  /** The path as given, used in every message. */
  source: string;
}

const formatsByExtension: Record<string, DataFormat> = {
  '.csv': 'csv',
  '.tsv': 'tsv',
  '.tab': 'tsv',
  '.txt': 'text',
  '.dat': 'text',
  '.json': 'json',
  '.npy': 'npy',
};

export const allowedExtensions = Object.keys(formatsByExtension);

function isFolder(path: string): boolean {
  try {
    return statSync(path).isDirectory();
  } catch {
    return false;
  }
}

/** The format a path's extension implies (case-insensitive), or a usage error listing the allowed ones. */
export function formatOf(path: string): DataFormat {
  const extension = extname(path).toLowerCase();
  const format = formatsByExtension[extension];
  if (format) return format;
  const what = extension === '' ? 'has no extension' : `has extension "${extname(path)}"`;
  const hint = extension === '.npz' ? ' (for an .npz archive, save the array with numpy.save as .npy)' : '';
  throw new UsageError(`${path} ${what}; allowed: ${allowedExtensions.join(', ')}${hint}`);
}

/** The path that stands for standard input, as in most command-line tools. */
export const STDIN_PATH = '-';
/** How messages name standard input (the path `-` would read as a stray dash). */
const STDIN_NAME = 'standard input';

/** NumPy's .npy magic string: byte 0x93 then "NUMPY". */
const NPY_MAGIC = [0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59];

/**
 * The format of bytes without a file name: .npy by its magic string, JSON when the first character that is
 * not white space (after a UTF-8 byte order mark) opens an array or object, else delimited text whose
 * delimiter is guessed from the first lines. A '#' comment line is text, so a commented header stays text.
 */
export function sniffFormat(bytes: Uint8Array): DataFormat {
  if (NPY_MAGIC.every((b, i) => bytes[i] === b)) return 'npy';
  let i = bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf ? 3 : 0;
  while (i < bytes.length && (bytes[i] === 0x20 || bytes[i] === 0x09 || bytes[i] === 0x0a || bytes[i] === 0x0d)) i++;
  return bytes[i] === 0x5b || bytes[i] === 0x7b ? 'json' : 'text';
}

/** All of standard input; a terminal is refused, since the command would wait for typing nobody meant to do. */
function readStandardInput(): Buffer {
  if (isatty(0))
    throw new UsageError(`${STDIN_PATH} reads the sample from standard input, which is a terminal here; pipe the data in, e.g. cat data.csv | hhat estimate -`);
  const chunks: Buffer[] = [];
  const chunk = Buffer.allocUnsafe(1 << 20);
  for (;;) {
    let read: number;
    try {
      read = readSync(0, chunk, 0, chunk.length, null);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      // A non-blocking pipe with nothing yet: wait a moment for the writer.
      if (code === 'EAGAIN') {
        Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 5);
        continue;
      }
      if (code === 'EOF') break;
      throw new UsageError(`cannot read the sample from ${STDIN_NAME}: ${readFailureReason(error)}`);
    }
    if (read === 0) break;
    chunks.push(Buffer.from(chunk.subarray(0, read)));
  }
  return Buffer.concat(chunks);
}

/** Standard input as a sample: held in memory whole (a pipe cannot be read twice), its format sniffed unless given. */
function readStandardInputSample(options: ReadOptions): LoadedSample {
  const bytes = readStandardInput();
  if (bytes.length === 0) throw new UsageError(`${STDIN_NAME} is empty; pipe a sample in (CSV/TSV/TXT, JSON or NumPy .npy)`);
  const format = options.format ?? sniffFormat(bytes);
  const parseOptions = { source: STDIN_NAME, columns: options.columns };
  options.onProgress?.(bytes.length, bytes.length);
  switch (format) {
    case 'json':
      return { ...parseJson(bytes, parseOptions), format, source: STDIN_PATH };
    case 'npy':
      return { ...parseNpy(bytes, parseOptions), format, source: STDIN_PATH };
    default: {
      const delimiter: Delimiter | undefined = format === 'csv' ? 'comma' : format === 'tsv' ? 'tab' : undefined;
      return { ...parseDelimited(bytes, { ...parseOptions, delimiter }), format, source: STDIN_PATH };
    }
  }
}

/** Reads a data file (or standard input, `-`) into a sample; every problem is a UsageError naming the file and the place. */
export function readSample(path: string, options: ReadOptions = {}): LoadedSample {
  if (path === STDIN_PATH) return readStandardInputSample(options);
  // Before the extension: a folder named without one is a folder, not a file of an unknown format.
  if (isFolder(path)) throw new UsageError(`cannot read data file ${path}: it is a directory`);
  const format = options.format ?? formatOf(path);
  const parseOptions = { source: path, columns: options.columns };
  switch (format) {
    case 'json':
      return { ...parseJson(readBytes(path), parseOptions), format, source: path };
    case 'npy':
      return { ...parseNpy(readBytes(path), parseOptions), format, source: path };
    default: {
      // Delimited text is read through a window straight into the typed array of values, so a file of
      // hundreds of megabytes is never held as bytes or text in full.
      const delimiter: Delimiter | undefined = format === 'csv' ? 'comma' : format === 'tsv' ? 'tab' : undefined;
      const fd = openFile(path);
      try {
        const table = readDelimitedFile(fd, fstatSync(fd).size, { ...parseOptions, delimiter, onProgress: options.onProgress });
        return { ...table, format, source: path };
      } catch (error) {
        // A read that fails part way (a device error, a file truncated under us) is about the file.
        throw error instanceof UsageError || !(error as NodeJS.ErrnoException).code ? error : readError(path, error);
      } finally {
        closeSync(fd);
      }
    }
  }
}

function openFile(path: string): number {
  try {
    const fd = openSync(path, 'r');
    if (fstatSync(fd).isDirectory()) {
      closeSync(fd);
      throw Object.assign(new Error('directory'), { code: 'EISDIR' });
    }
    return fd;
  } catch (error) {
    throw readError(path, error);
  }
}

function readBytes(path: string): Buffer {
  try {
    return readFileSync(path);
  } catch (error) {
    throw readError(path, error);
  }
}

function readError(path: string, error: unknown): UsageError {
  return new UsageError(`cannot read data file ${path}: ${readFailureReason(error)}`);
}

/**
 * Reading the user's data: a file to a `Sample`, or one line saying what is wrong and what is allowed.
 *
 *   const { sample, columnNames } = readSample('trial.csv', { columns: 'x,y' });
 *
 * The format comes from the extension: .csv (commas), .tsv (tabs), .txt and .dat (delimiter guessed from
 * the first lines: tab, semicolon, comma, else runs of spaces), .json, and .npy. The path `-` (standard input)
 * and a name without an extension (`samples`, a shell's `/dev/fd/63`) have their format read from their first
 * bytes (sniffFormat). The parsers also work on strings and bytes:
 * `parseDelimited`, `parseJson`, `parseNpy`. See each module for the accepted forms.
 */
import { closeSync, fstatSync, openSync, readFileSync, readSync, statSync } from 'node:fs';
import { isatty } from 'node:tty';
import { extname } from 'node:path';
import { UsageError } from '../core/errors.js';
import { readFailureReason } from '../core/files.js';
import { parseDelimited, readDelimitedFile, type Delimiter } from './delimited.js';
import { parseJson } from './json.js';
import { npyByteLength, parseNpy } from './npy.js';
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
function readStandardInput(format: DataFormat | undefined): Buffer {
  if (isatty(0))
    throw new UsageError(`${STDIN_PATH} reads the sample from standard input, which is a terminal here; pipe the data in, e.g. cat data.csv | hhat estimate -`);
  return readStream(0, format, (error) => new UsageError(`cannot read the sample from ${STDIN_NAME}: ${readFailureReason(error)}`));
}

/**
 * A pipe's or a device's bytes, read in chunks until its end, or sooner where the bytes say no more are needed: a
 * .npy ends where its header says the array does, and bytes that cannot be the format (no \x93NUMPY where a .npy
 * is expected, a zero byte in text or JSON) stop the read at once, for the parser to name. Without that, a
 * device such as /dev/zero, which never ends, would be read until memory ran out.
 */
function readStream(fd: number, format: DataFormat | undefined, failure: (error: unknown) => UsageError): Buffer {
  const chunks: Buffer[] = [];
  const chunk = Buffer.allocUnsafe(1 << 20);
  let total = 0;
  let expected = Infinity;
  let decided = false;
  while (total < expected) {
    let read: number;
    try {
      read = readSync(fd, chunk, 0, chunk.length, null);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      // A non-blocking pipe with nothing yet: wait a moment for the writer.
      if (code === 'EAGAIN') {
        Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 5);
        continue;
      }
      if (code === 'EOF') break;
      throw failure(error);
    }
    if (read === 0) break;
    chunks.push(Buffer.from(chunk.subarray(0, read)));
    total += read;
    if (!decided && total >= 12) {
      const head = Buffer.concat(chunks);
      const kind = format ?? sniffFormat(head);
      if (kind === 'npy') {
        if (!NPY_MAGIC.every((b, i) => head[i] === b)) break;
        const length = npyByteLength(head);
        if (length !== null) [expected, decided] = [length, true];
        // A header longer than what has come yet: decide on a later chunk (a v2 header may be up to 4 GiB).
        else if (total > 1 << 24) decided = true;
      } else {
        if (head.includes(0)) break;
        decided = true;
      }
    }
  }
  const bytes = Buffer.concat(chunks);
  return total > expected ? bytes.subarray(0, expected) : bytes;
}

/** Standard input as a sample: held in memory whole (a pipe cannot be read twice), its format sniffed unless given. */
function readStandardInputSample(options: ReadOptions): LoadedSample {
  const bytes = readStandardInput(options.format);
  if (bytes.length === 0) throw new UsageError(`${STDIN_NAME} is empty; pipe a sample in (CSV/TSV/TXT, JSON or NumPy .npy)`);
  return parseBytes(bytes, options.format ?? sniffFormat(bytes), STDIN_NAME, STDIN_PATH, options);
}

/** A sample from bytes held whole, in `format`; messages name `name`, the result's source is `path`. */
function parseBytes(bytes: Buffer, format: DataFormat, name: string, path: string, options: ReadOptions): LoadedSample {
  const parseOptions = { source: name, columns: options.columns };
  options.onProgress?.(bytes.length, bytes.length);
  switch (format) {
    case 'json':
      return { ...parseJson(bytes, parseOptions), format, source: path };
    case 'npy':
      return { ...parseNpy(bytes, parseOptions), format, source: path };
    default: {
      const delimiter: Delimiter | undefined = format === 'csv' ? 'comma' : format === 'tsv' ? 'tab' : undefined;
      return { ...parseDelimited(bytes, { ...parseOptions, delimiter }), format, source: path };
    }
  }
}

/** How many first bytes decide the format of a file named without an extension. */
const SNIFF_HEAD_BYTES = 4096;

/**
 * The format of an open regular file named without an extension, from its first bytes (sniffFormat), as for
 * standard input: a name such as `samples` or a shell's temporary `/dev/fd/63` carries no format of its own.
 */
function sniffFile(fd: number): DataFormat {
  const head = Buffer.alloc(SNIFF_HEAD_BYTES);
  const read = readSync(fd, head, 0, head.length, 0);
  return sniffFormat(head.subarray(0, read));
}

/**
 * Reads a data file (or standard input, `-`) into a sample; every problem is a UsageError naming the file and the place.
 * The format is `options.format`, else the extension's, else, for a name without one, sniffed from the first bytes.
 * A pipe or a device (a named FIFO, a shell's `<(...)`) is read once, as far as its format needs, and parsed whole.
 */
export function readSample(path: string, options: ReadOptions = {}): LoadedSample {
  return refuseStackedReplicates(readAnySample(path, options), options);
}

/**
 * `hhat draw --replicates R` stacks R samples in one CSV under a first column "replicate": read as one sample,
 * the index would become a coordinate and R draws one cloud. Columns the user chose are taken as chosen.
 */
function refuseStackedReplicates(loaded: LoadedSample, options: ReadOptions): LoadedSample {
  if (options.columns === undefined && loaded.namedColumns && loaded.columnNames[0] === 'replicate' && loaded.columnNames.length > 1) {
    throw new UsageError(
      `${loaded.source}: its first column is "replicate", as in the stacked replicates \`hhat draw --replicates\` writes, which are not one sample; estimate one replicate (hhat draw --replicate I, or --split), or name the data columns with --columns`,
    );
  }
  return loaded;
}

function readAnySample(path: string, options: ReadOptions): LoadedSample {
  if (path === STDIN_PATH) return readStandardInputSample(options);
  // Before the extension: a folder named without one is a folder, not a file of an unknown format.
  if (isFolder(path)) throw new UsageError(`cannot read data file ${path}: it is a directory`);
  const named = options.format ?? (extname(path) === '' ? undefined : formatOf(path));
  const fd = openFile(path);
  try {
    const stat = fstatSync(fd);
    // A file that says it is empty may not be (/proc, /sys: its size is 0, its bytes are made as they are read):
    // it is read to its end as a pipe is; one that is truly empty goes on to its format's own "empty" line.
    if (!stat.isFile() || stat.size === 0) {
      const bytes = readStream(fd, named, (error) => readError(path, error));
      if (bytes.length > 0) return parseBytes(bytes, named ?? sniffFormat(bytes), path, path, options);
      if (!stat.isFile()) throw new UsageError(`${path} is empty; it holds no sample (CSV/TSV/TXT, JSON or NumPy .npy)`);
    }
    const format = named ?? sniffFile(fd);
    const parseOptions = { source: path, columns: options.columns };
    switch (format) {
      case 'json':
        return { ...parseJson(readFileSync(fd), parseOptions), format, source: path };
      case 'npy':
        return { ...parseNpy(readFileSync(fd), parseOptions), format, source: path };
      default: {
        // Delimited text is read through a window straight into the typed array of values, so a file of
        // hundreds of megabytes is never held as bytes or text in full.
        const delimiter: Delimiter | undefined = format === 'csv' ? 'comma' : format === 'tsv' ? 'tab' : undefined;
        const table = readDelimitedFile(fd, stat.size, { ...parseOptions, delimiter, onProgress: options.onProgress });
        return { ...table, format, source: path };
      }
    }
  } catch (error) {
    // A read that fails part way (a device error, a file truncated under us) is about the file.
    throw error instanceof UsageError || !(error as NodeJS.ErrnoException).code ? error : readError(path, error);
  } finally {
    closeSync(fd);
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

function readError(path: string, error: unknown): UsageError {
  return new UsageError(`cannot read data file ${path}: ${readFailureReason(error)}`);
}

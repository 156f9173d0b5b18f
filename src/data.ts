/**
 * Reading the user's data: a file to a `Sample`, or one line saying what is wrong and what is allowed.
 *
 *   const { sample, columnNames } = readSample('trial.csv', { columns: 'x,y' });
 *
 * The format comes from the extension: .csv (commas), .tsv (tabs), .txt and .dat (delimiter guessed from
 * the first lines: tab, semicolon, comma, else runs of spaces), .json, and .npy. The parsers also work on
 * strings and bytes: `parseDelimited`, `parseJson`, `parseNpy`. See each module for the accepted forms.
 */
import { readFileSync } from 'node:fs';
import { extname } from 'node:path';
import { UsageError } from './errors.js';
import { parseDelimited, type Delimiter } from './data/delimited.js';
import { parseJson } from './data/json.js';
import { parseNpy } from './data/npy.js';
import type { DataTable } from './data/table.js';

export { parseDelimited, type Delimiter, type DelimitedOptions, type DelimitedTable } from './data/delimited.js';
export { parseJson } from './data/json.js';
export { parseNpy, type NpyTable } from './data/npy.js';
export { resolveColumns, selectTableColumns } from './data/columns.js';
export { findRepeats, describeRepeats, sortedOrder, type ColumnRepeats, type RepeatReport } from './data/repeats.js';
export type { DataTable, ParseOptions } from './data/table.js';

export type DataFormat = 'csv' | 'tsv' | 'text' | 'json' | 'npy';

export interface ReadOptions {
  /** A column selection: "1,3", "2-4" or header names "x,y" (positions count from 1). */
  columns?: string;
  /** Overrides the format the extension implies. */
  format?: DataFormat;
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

/** The format a path's extension implies (case-insensitive), or a usage error listing the allowed ones. */
export function formatOf(path: string): DataFormat {
  const extension = extname(path).toLowerCase();
  const format = formatsByExtension[extension];
  if (format) return format;
  const what = extension === '' ? 'has no extension' : `has extension "${extname(path)}"`;
  const hint = extension === '.npz' ? ' (for an .npz archive, save the array with numpy.save as .npy)' : '';
  throw new UsageError(`${path} ${what}; allowed: ${allowedExtensions.join(', ')}${hint}`);
}

/** Reads a data file into a sample; every problem is a UsageError naming the file and the place. */
export function readSample(path: string, options: ReadOptions = {}): LoadedSample {
  const format = options.format ?? formatOf(path);
  const bytes = readBytes(path);
  const parseOptions = { source: path, columns: options.columns };
  switch (format) {
    case 'json':
      return { ...parseJson(bytes, parseOptions), format, source: path };
    case 'npy':
      return { ...parseNpy(bytes, parseOptions), format, source: path };
    default: {
      const delimiter: Delimiter | undefined = format === 'csv' ? 'comma' : format === 'tsv' ? 'tab' : undefined;
      const table = parseDelimited(bytes, { ...parseOptions, delimiter });
      return { ...table, format, source: path };
    }
  }
}

function readBytes(path: string): Buffer {
  try {
    return readFileSync(path);
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    const reason =
      code === 'ENOENT'
        ? 'no such file'
        : code === 'EISDIR'
          ? 'it is a directory'
          : code === 'EACCES' || code === 'EPERM'
            ? 'permission denied'
            : ((error as Error).message.split('\n')[0] ?? 'unknown error');
    throw new UsageError(`cannot read data file ${path}: ${reason}`);
  }
}

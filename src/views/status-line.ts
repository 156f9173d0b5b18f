/**
 * One redrawn status line on a terminal, for steps of a command that take long on large inputs (reading a
 * file, an estimator on millions of rows). Nothing at all when the stream is not a terminal: logs and
 * pipes get the results, not the redraws.
 *
 *   const status = statusLine(process.stderr, 'hhat estimate');
 *   status.show('reading data.csv: 45% of 202 MB');
 *   status.clear();
 */
import { formatBytes } from '../core/memory.js';

export interface StatusLine {
  /** Replaces the line (redraws at most every 100 ms unless `force`). */
  show(text: string, force?: boolean): void;
  /** Removes the line, so what is printed next starts on a clean line. */
  clear(): void;
}

export function statusLine(stream: { isTTY?: boolean; write(text: string): unknown }, prefix: string): StatusLine {
  if (!stream.isTTY) return { show() {}, clear() {} };
  let shownLength = 0;
  let lastDrawn = -Infinity;
  return {
    show(text, force = false) {
      const now = performance.now();
      if (!force && now - lastDrawn < 100) return;
      lastDrawn = now;
      const line = `${prefix}: ${text}`;
      stream.write(`\r${line}${' '.repeat(Math.max(0, shownLength - line.length))}`);
      shownLength = line.length;
    },
    clear() {
      if (shownLength) stream.write(`\r${' '.repeat(shownLength)}\r`);
      shownLength = 0;
    },
  };
}

/** "45% of 202 MB" for a reading progress callback. */
export function describeReadProgress(bytesRead: number, totalBytes: number): string {
  const percent = totalBytes > 0 ? Math.floor((100 * bytesRead) / totalBytes) : 100;
  return `${percent}% of ${formatBytes(totalBytes)}`;
}

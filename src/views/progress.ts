import type { Progress } from '../harness/runner.js';

function duration(ms: number): string {
  const s = Math.round(ms / 1000);
  if (s < 60) return `${s} s`;
  const m = Math.floor(s / 60);
  return m < 60 ? `${m} min ${s % 60} s` : `${Math.floor(m / 60)} h ${m % 60} min`;
}

/**
 * The words of a progress line. The bar fills with finished units, so their count comes first and is the one
 * an interrupted run reports as saved; a cell is done only when all its units are, so the cells lag behind.
 * The time left waits for the runner's rule (timeLeftMs) and is dropped once everything is done.
 */
export function describeProgress(p: Progress): string {
  const counts = `${p.unitsDone}/${p.unitsTotal} units, ${p.cellsDone}/${p.cellsTotal} cells done`;
  const left = p.unitsDone >= p.unitsTotal ? '' : p.remainingMs === null ? ' · estimating time left' : ` · about ${duration(p.remainingMs)} left`;
  const failures = p.failures ? ` · ${p.failures} failed estimate${p.failures === 1 ? '' : 's'}` : '';
  return `${counts} · ${duration(p.elapsedMs)} elapsed${left}${failures}`;
}

/** The bar: one mark per 1/width of the units, so it is full exactly when every unit is done. */
export function progressBar(p: Progress, width = 24): string {
  const filled = p.unitsTotal ? Math.min(width, Math.floor((width * p.unitsDone) / p.unitsTotal)) : width;
  return `[${'#'.repeat(filled)}${'.'.repeat(width - filled)}]`;
}

/**
 * A redrawn bar on a terminal; plain lines every `intervalMs` otherwise (CI logs, files), so logs stay short.
 */
export function progressReporter(
  stream: NodeJS.WriteStream | { isTTY?: boolean; write(text: string): unknown },
  intervalMs = 10000,
): {
  update(p: Progress): void;
  done(): void;
} {
  const tty = Boolean(stream.isTTY);
  let lastPrinted = -Infinity;
  let lastLength = 0;
  let last: Progress | null = null;
  return {
    update(p) {
      last = p;
      if (tty) {
        const line = `${progressBar(p)} ${describeProgress(p)}`;
        stream.write(`\r${line}${' '.repeat(Math.max(0, lastLength - line.length))}`);
        lastLength = line.length;
      } else if (p.elapsedMs - lastPrinted >= intervalMs) {
        lastPrinted = p.elapsedMs;
        stream.write(`progress: ${describeProgress(p)}\n`);
      }
    },
    done() {
      if (tty && lastLength) stream.write('\n');
      else if (!tty && last && last.elapsedMs > lastPrinted) stream.write(`progress: ${describeProgress(last)}\n`);
    },
  };
}

import type { Progress } from '../harness/runner.js';

function duration(ms: number): string {
  const s = Math.round(ms / 1000);
  if (s < 60) return `${s} s`;
  const m = Math.floor(s / 60);
  return m < 60 ? `${m} min ${s % 60} s` : `${Math.floor(m / 60)} h ${m % 60} min`;
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
  const describe = (p: Progress) => {
    const left = p.remainingMs === null ? 'estimating time left' : `about ${duration(p.remainingMs)} left`;
    const failures = p.failures ? ` · ${p.failures} failed estimate${p.failures === 1 ? '' : 's'}` : '';
    return `${p.cellsDone}/${p.cellsTotal} cells done · ${duration(p.elapsedMs)} elapsed · ${left}${failures}`;
  };
  return {
    update(p) {
      last = p;
      if (tty) {
        const width = 24;
        const filled = p.unitsTotal ? Math.round((width * p.unitsDone) / p.unitsTotal) : width;
        const line = `[${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${describe(p)}`;
        stream.write(`\r${line}${' '.repeat(Math.max(0, lastLength - line.length))}`);
        lastLength = line.length;
      } else if (p.elapsedMs - lastPrinted >= intervalMs) {
        lastPrinted = p.elapsedMs;
        stream.write(`progress: ${describe(p)}\n`);
      }
    },
    done() {
      if (tty && lastLength) stream.write('\n');
      else if (!tty && last && last.elapsedMs > lastPrinted) stream.write(`progress: ${describe(last)}\n`);
    },
  };
}

/**
 * " (did you mean normal?)" for a mistyped name: the known name nearest by edit distance (insertions, deletions,
 * substitutions and swaps of neighbours), when it is close enough to be a typo: at most a third of the name's
 * length, and at least one edit; nothing when two names are equally near, or for names under 3 characters
 * (any one-letter name is one edit from any other).
 */
export function didYouMean(typed: string, known: readonly string[]): string {
  if (typed.length < 3) return '';
  const limit = Math.max(1, Math.floor(typed.length / 3));
  let best: string | null = null;
  let bestDistance = Infinity;
  let tied = false;
  for (const name of known) {
    const distance = editDistance(typed.toLowerCase(), name.toLowerCase());
    if (distance < bestDistance) [best, bestDistance, tied] = [name, distance, false];
    else if (distance === bestDistance && name !== best) tied = true;
  }
  return best !== null && bestDistance > 0 && bestDistance <= limit && !tied ? ` (did you mean ${best}?)` : '';
}

/** Optimal string alignment distance (Damerau–Levenshtein without repeated edits of one substring). */
export function editDistance(a: string, b: string): number {
  const rows = a.length + 1;
  const cols = b.length + 1;
  const d = new Int32Array(rows * cols);
  for (let i = 0; i < rows; i++) d[i * cols] = i;
  for (let j = 0; j < cols; j++) d[j] = j;
  for (let i = 1; i < rows; i++) {
    for (let j = 1; j < cols; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : 1;
      let value = Math.min(d[(i - 1) * cols + j] + 1, d[i * cols + j - 1] + 1, d[(i - 1) * cols + j - 1] + cost);
      if (i > 1 && j > 1 && a[i - 1] === b[j - 2] && a[i - 2] === b[j - 1]) value = Math.min(value, d[(i - 2) * cols + j - 2] + 1);
      d[i * cols + j] = value;
    }
  }
  return d[rows * cols - 1];
}

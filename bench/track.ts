/**
 * `npm run track`: the project tracking itself. Reruns the built-in default plans of entropy, mutual
 * information and divergence (2 workers), compares each with its committed compact baseline
 * (results/baseline/QUANTITY.jsonl, src/baseline-file.ts) by src/compare.ts's paired tests on the same draws, and
 * fails when any cell got worse or went missing. On the platform that made the baselines every estimate is
 * bit-identical, so every cell should be `unchanged`; elsewhere pass a tolerance (HHAT_TRACK_TOLERANCE=1e-9)
 * for last-digit differences of the math library.
 *
 * The full run files and each comparison in Markdown are written under results/track/ (git-ignored; CI keeps
 * them as artifacts).
 *
 *   npm run track                    # every plan with a baseline (entropy, MI and divergence must have one)
 *   npm run track -- divergence      # one or more plans by quantity
 *   npm run baseline                 # refresh every committed baseline on purpose (after a deliberate change), from a
 *                                    # clean tree only: the commit that adds them must hold the code that made them
 */
import { existsSync } from 'node:fs';
import { resolve } from 'node:path';
import { defaultPlan } from '../src/harness/default-plan.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, readRunFile, writeFileAtomic, writeRunFile } from '../src/analysis/results.js';
import { compareRuns, describeTolerance, parseTolerance, type CellComparison, type Comparison } from '../src/analysis/compare.js';
import { formatComparisonMarkdown } from '../src/views/compare-format.js';
import { comparableBaseline, describeBaselineCell, readBaseline, writeBaseline } from '../src/analysis/baseline-file.js';
import { QUANTITIES } from '../src/harness/modules.js';
import { EnvironmentError, UsageError } from '../src/core/errors.js';
import type { Quantity } from '../src/core/contracts.js';
import { dirtyTreeRefusal } from './clean-tree.js';

const WORKERS = 2;
/** Changed cells listed per plan on screen; the Markdown comparison under results/track/ lists them all. */
const SHOWN = 20;

const baselinePath = (q: Quantity) => `results/baseline/${q}.jsonl`;
const runPath = (q: Quantity) => `results/track/${q}.json`;
const comparisonPath = (q: Quantity) => `results/track/${q}.comparison.md`;

function significant(x: number): string {
  return Number.isFinite(x) ? String(+x.toPrecision(3)) : String(x);
}

/** What moved in a changed cell, in one line: the paired shift of the estimates and the RMSE before and after. */
function changeLine(cell: CellComparison): string {
  const moved = cell.shift ? `mean estimate ${cell.shift.value >= 0 ? '+' : ''}${significant(cell.shift.value)} ± ${significant(cell.shift.se)} nats, ` : '';
  const rmse = `RMSE ${significant(cell.rmse.base.value)} → ${significant(cell.rmse.next.value)} (${cell.rmse.change >= 0 ? '+' : ''}${significant(cell.rmse.change)})`;
  return `${cell.status}: ${describeBaselineCell(cell)}: ${moved}${rmse}; ${cell.reasons[0] ?? ''}`;
}

function report(quantity: Quantity, comparison: Comparison, seconds: string): number {
  const { counts } = comparison;
  console.log(
    `${quantity}: default plan rerun in ${seconds} s; compared with ${baselinePath(quantity)} (${comparison.pairing.paired ? 'paired' : `unpaired: ${comparison.pairing.reason}`})`,
  );
  console.log(
    `${quantity} cells: ${counts.unchanged} unchanged, ${counts['changed-within-noise']} changed within noise or the tolerance (${comparison.tolerance.text}), ${counts.improved} improved, ${counts.worse} worse, ${counts.added} added, ${counts.removed} removed`,
  );
  // Worse first, so the cells that fail the run are never cut off the screen.
  const changed = [
    ...comparison.cells.filter((c) => c.status === 'worse'),
    ...comparison.cells.filter((c) => c.status !== 'worse' && c.status !== 'unchanged'),
  ];
  for (const cell of changed.slice(0, SHOWN)) console.log(`  ${changeLine(cell)}`);
  if (changed.length > SHOWN) console.log(`  … ${changed.length - SHOWN} more changed cells in ${comparisonPath(quantity)}`);
  for (const cell of comparison.removed) console.log(`  missing: ${describeBaselineCell(cell)}`);
  for (const cell of comparison.added) console.log(`  added: ${describeBaselineCell(cell)}`);
  return counts.worse + counts.removed;
}

/**
 * The plans whose baseline must exist: a missing one fails `npm run track` (and `npm run baseline` writes them).
 * Conditional mutual information is tracked by default once results/baseline/conditional-mutual-information.jsonl
 * is committed (`npm run baseline -- conditional-mutual-information` on a clean tree, by whoever merges); until
 * then it is tracked or refreshed only when named.
 */
const TRACKED_BY_DEFAULT: readonly Quantity[] = ['entropy', 'mutual-information', 'divergence'];

function quantitiesAsked(args: string[]): Quantity[] {
  for (const a of args) {
    if (!(QUANTITIES as readonly string[]).includes(a))
      throw new UsageError(`${a} is not a plan to track; use ${QUANTITIES.join(', ')} (or none for every plan with a baseline)`);
  }
  if (args.length) return QUANTITIES.filter((q) => args.includes(q));
  return QUANTITIES.filter((q) => TRACKED_BY_DEFAULT.includes(q) || existsSync(baselinePath(q)));
}

async function main(): Promise<number> {
  const args = process.argv.slice(2);
  const refresh = args.includes('--refresh');
  const quantities = quantitiesAsked(args.filter((a) => a !== '--refresh'));
  const tolerance = parseTolerance(process.env.HHAT_TRACK_TOLERANCE ?? '0');
  // Refused before any work: the baseline's origin is the commit it is made from (bench/clean-tree.ts).
  const refusal = refresh ? dirtyTreeRefusal(process.cwd()) : null;
  if (refusal) throw new UsageError(refusal);
  // Read every baseline before the first plan runs: a missing or broken file should not cost a minute first.
  const baselines = refresh
    ? null
    : new Map(
        quantities.map((q) => {
          if (!existsSync(baselinePath(q))) throw new UsageError(`${baselinePath(q)} is missing; npm run baseline writes it (results/README.md)`);
          return [q, comparableBaseline(readBaseline(baselinePath(q)))];
        }),
      );
  let failed = 0;
  let passed = 0;
  let anyChange = false;
  for (const quantity of quantities) {
    const { plan } = resolvePlan(defaultPlan(quantity));
    const started = performance.now();
    const run = assembleRun(await runPlan(plan, { workers: WORKERS }), null);
    const seconds = ((performance.now() - started) / 1000).toFixed(1);
    writeRunFile(resolve(runPath(quantity)), run);
    // The default plans exercise every column of the run file; one that `report` or `compare` could not read
    // back is a failure of this checkout even when every estimate is unchanged.
    readRunFile(resolve(runPath(quantity)));
    if (refresh) {
      const baseline = writeBaseline(resolve(baselinePath(quantity)), run);
      console.log(
        `${quantity}: baseline refreshed from commit ${run.environment.git?.commit.slice(0, 12) ?? '?'}: ${baseline.cells.length} cells in ${seconds} s → ${baselinePath(quantity)} (full run: ${runPath(quantity)})`,
      );
      continue;
    }
    const comparison = compareRuns(baselines!.get(quantity)!, run, { tolerance }, { base: baselinePath(quantity), next: 'this checkout' });
    writeFileAtomic(resolve(comparisonPath(quantity)), `${formatComparisonMarkdown(comparison)}\n`);
    const planFailed = report(quantity, comparison, seconds);
    failed += planFailed;
    passed += comparison.cells.length - comparison.counts.worse;
    anyChange ||= comparison.counts.unchanged !== comparison.cells.length || comparison.counts.added > 0 || comparison.counts.removed > 0;
  }
  if (refresh) return 0;
  console.log(`full runs and comparisons: results/track/ (tolerance ${describeTolerance(tolerance)})`);
  if (anyChange) console.log('If the change is deliberate, refresh the baselines: npm run baseline (see results/README.md).');
  console.log(`track: ${passed} passed, ${failed} failed`);
  return failed ? 1 : 0;
}

try {
  process.exitCode = await main();
} catch (error) {
  if (!(error instanceof UsageError || error instanceof EnvironmentError)) throw error;
  console.error(`track: ${error.message}`);
  process.exitCode = error instanceof UsageError ? 2 : 1;
}

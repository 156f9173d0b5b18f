import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import { UsageError } from '../core/errors.js';
import { compareRuns, failingCells, failsPolicy, parseFailOn, parseTolerance, type FailOn } from '../analysis/compare.js';
import { parseLevel } from '../core/options.js';
import { formatComparisonJson, formatComparisonJunit, formatComparisonMarkdown, formatComparisonText } from '../views/compare-format.js';
import { readRunFile, writeFileAtomic } from '../analysis/results.js';

interface CompareOptions {
  tolerance?: string;
  level?: string;
  failOn?: string;
  unpaired?: boolean;
  markdown?: boolean;
  json?: boolean;
  junit?: string;
  allowMissing?: boolean;
}

export function registerCompareCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('compare')
    .description(COMMANDS.compare)
    .argument('<base>', 'the run file to compare against (e.g. results/before.json)')
    .argument('<new>', 'the run file with the changed code')
    .option('--tolerance <t>', 'smallest |ΔRMSE| that counts as worse or improved: nats (0.01) or a percentage of the base RMSE (5%)', '0')
    .option(
      '--level <c>',
      '1 − the chance that any cell whose estimates did not change in distribution is called worse or improved (over all changed cells by Holm, within a cell over its tests by Bonferroni)',
      '0.95',
    )
    .option(
      '--fail-on <what>',
      'exit 1 when a cell is worse beyond the tolerance (worse), or when any cell differs at all (changed; on different draws, when the tests find a change)',
    )
    .option('--allow-missing', 'with --fail-on: do not fail because cells of the base run are missing from the new one')
    .option('--unpaired', "compare with Welch's t test even when both runs drew the same samples")
    .option('--markdown', 'print Markdown for a pull-request comment')
    .option('--json', 'print the comparison as JSON')
    .option('--junit <file>', 'also write JUnit XML: one testcase per cell, failing cells as failures')
    .action((basePath: string, nextPath: string, options: CompareOptions) => {
      if (options.markdown && options.json) throw new UsageError('--markdown and --json cannot be combined; choose one output format');
      const failOn: FailOn | undefined = options.failOn === undefined ? undefined : parseFailOn(options.failOn);
      const tolerance = parseTolerance(options.tolerance ?? '0');
      const level = parseLevel(options.level ?? '0.95');
      const comparison = compareRuns(
        readRunFile(basePath),
        readRunFile(nextPath),
        { tolerance, level, pairing: options.unpaired ? 'unpaired' : 'auto' },
        { base: basePath, next: nextPath },
      );
      if (options.json) print(formatComparisonJson(comparison));
      else if (options.markdown) print(formatComparisonMarkdown(comparison));
      else print(formatComparisonText(comparison, { base: basePath, next: nextPath }));
      const allowMissing = Boolean(options.allowMissing);
      if (options.junit) writeFileAtomic(options.junit, formatComparisonJunit(comparison, failOn ?? 'worse', allowMissing));
      if (failOn && failsPolicy(comparison, failOn, allowMissing)) {
        const failing = failingCells(comparison, failOn).length;
        const parts: string[] = [];
        if (failing)
          parts.push(failOn === 'worse' ? `${failing} cell${failing === 1 ? ' is' : 's are'} worse` : `${failing} cell${failing === 1 ? '' : 's'} changed`);
        if (!allowMissing && comparison.removed.length)
          parts.push(
            `${comparison.removed.length} cell${comparison.removed.length === 1 ? ' of the base run is' : 's of the base run are'} missing from the new run (--allow-missing to accept)`,
          );
        if (failOn === 'changed' && comparison.added.length)
          parts.push(`${comparison.added.length} cell${comparison.added.length === 1 ? ' is' : 's are'} only in the new run`);
        printErr(`hhat compare: ${parts.join('; ')} (--fail-on ${failOn})`);
        process.exitCode = 1;
      }
    });
}

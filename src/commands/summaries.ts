/**
 * One line per command, shown by `hhat --help`. The CLI lists every command from here without loading any of
 * them, and loads only the one that runs: start-up then costs what that command needs.
 */
export const COMMANDS = {
  bench: 'run a benchmark plan (the built-in default plan without arguments) and write a run file',
  merge: 'join the shard run files of one plan into the run file an unsharded run writes',
  scenarios: 'list scenarios: distributions with a known true value, their sources and facts',
  estimators: 'list estimators: settings with defaults and allowed values, supported dimensions, references',
  estimate:
    'estimate the differential entropy of a data file (CSV/TSV/TXT, JSON, NumPy .npy) with one or more estimators; the mutual information with --x-columns and --y-columns (conditional: and --z-columns), the transfer entropy with --source-column and --target-column, a divergence with --against',
  convert: 'move a differential entropy to another unit of the data: h + d·log(old unit / new unit)',
  report: 'write a self-contained HTML report (charts and sortable tables) of a run file',
  compare: 'compare two run files cell by cell: paired on the same draws, so small changes in estimator code show',
  check:
    'run the estimator conformance suite on the estimators of a module (or the built-ins): determinism, row order, units, invariances, typed errors on bad input, a known value',
  advise:
    'which estimator to use: for a described situation (--n, --dim), or for a data file, with an estimate, a bootstrap interval and a look-alike bias correction',
  draw: "write the exact samples a bench cell's estimators see (scenario, n, replicate, seed) as .npy, CSV or JSON, with the true value and its source",
} as const;

export type CommandName = keyof typeof COMMANDS;

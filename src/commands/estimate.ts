import type { Command } from 'commander';
import { UsageError, EstimateError, type EstimateErrorCode } from '../errors.js';
import { formatValue, renderTable, toBase, type Base } from '../format.js';
import { readSample, findRepeats, describeRepeats } from '../data.js';
import { describeReference, meanLogReference, parseReference } from '../reference.js';
import { unitLabel } from '../units.js';
import { describeRegistration, resolveModulePath, useEstimatorModules } from '../modules.js';
import type { Quantity, Sample, Settings } from '../contracts.js';
import { collect } from '../plan.js';
import { dimsRange, listEstimators, parseEstimatorSpec, runEstimator, type ConfiguredEstimator } from '../../estimators/index.js';

/** Side by side: the columns of `a` then those of `b`, row by row (same n). */
function joinColumns(a: Sample, b: Sample): Sample {
  const dim = a.dim + b.dim;
  const data = new Float64Array(a.n * dim);
  for (let i = 0; i < a.n; i++) {
    for (let j = 0; j < a.dim; j++) data[i * dim + j] = a.data[i * a.dim + j];
    for (let j = 0; j < b.dim; j++) data[i * dim + a.dim + j] = b.data[i * b.dim + j];
  }
  return { n: a.n, dim, data, xDim: a.dim };
}

/** A sensible default set for the data's dimension: the strongest methods of each family that apply. */
export function defaultEstimatorsFor(dim: number, quantity: Quantity = 'entropy'): string[] {
  if (quantity !== 'entropy') {
    return listEstimators()
      .filter((e) => e.quantity === quantity && dim >= e.dims[0] && dim <= e.dims[1])
      .map((e) => e.id);
  }
  if (dim === 1) return ['kozachenko-leonenko', 'ebrahimi', 'vasicek', 'kernel', 'histogram', 'gaussian'];
  if (dim <= 3) return ['kozachenko-leonenko', 'kozachenko-leonenko-weighted', 'kernel', 'histogram', 'gaussian'];
  return ['kozachenko-leonenko-weighted', 'kozachenko-leonenko', 'kernel', 'gaussian'];
}

interface EstimateRecord {
  estimator: string;
  settings: Settings;
  value: number | null;
  error?: string;
  /** Why the estimator could not run, as the estimator classified it (`ties` selects the repeated-value report). */
  code?: EstimateErrorCode;
}

/**
 * Every estimator on the sample; one that cannot run on these data becomes a record with its reason instead
 * of stopping the others. Usage mistakes still throw: they are checked before any estimate is made.
 */
export function estimateAll(sample: Sample, configured: ConfiguredEstimator[], base: Base): EstimateRecord[] {
  return configured.map((c) => {
    try {
      const { value, settings } = runEstimator(c, sample, { report: true });
      if (!Number.isFinite(value)) throw new EstimateError('numeric', `${c.estimator.id} gave ${value} on this sample`);
      return { estimator: c.estimator.id, settings, value: toBase(value, base) };
    } catch (error) {
      if (error instanceof EstimateError) {
        return { estimator: c.estimator.id, settings: c.settings, value: null, error: error.message, code: error.code };
      }
      throw error;
    }
  });
}

/** The reason as one line that names the estimator once, whether or not the message already starts with it. */
function failureLine(record: EstimateRecord): string {
  const message = record.error ?? '';
  return message.startsWith(record.estimator) ? message : `${record.estimator}: ${message}`;
}

const exitCodesHelp = `
Exit codes:
  0  every estimate was made; or only estimators of the default set (no
     --estimator) could not run on these data: their rows say "failed" with
     the reason, and one note on stderr counts them
  1  an estimator named with --estimator could not run on these data (its
     reason is on stderr; the other values are still printed), or no
     estimator of the default set could
  2  a mistake in the command: an unknown option, estimator or setting, a
     value that is not allowed, a file that cannot be read, an estimator for
     another quantity or dimension; nothing is estimated`;

export function registerEstimateCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('estimate')
    .description('estimate the differential entropy of a data file (CSV/TSV/TXT, JSON, NumPy .npy) with one or more estimators; the mutual information with --x-columns and --y-columns, a divergence with --against')
    .argument('<file>', 'rows are points, columns are coordinates')
    .option('--columns <list>', 'columns to use: positions from 1 ("1,3", "2-4") or header names ("x,y")')
    .option('--estimator <spec>', 'ID[:key=value,...] (repeatable; default: a set suited to the dimension)', collect)
    .option('--bits', 'values in bits instead of nats')
    .option('--unit <name>', 'the unit the data are recorded in, for labelling: values are relative to 1 unit^d (see hhat convert)')
    .option('--reference <m>', 'also give the entropy relative to a reference density m: unit:W, uniform:a,b or gaussian (minus the negentropy)')
    .option('--estimator-module <file>', 'load estimators from a JavaScript module (repeatable)', collect)
    .option('--x-columns <list>', 'mutual information between these columns (X) ...')
    .option('--y-columns <list>', '... and these (Y)')
    .option('--against <file>', 'a divergence D(P || Q): FILE holds the sample from P, this file the sample from Q')
    .option('--json', 'print {"n", "dim", "base", "estimates": [...]} with the settings actually used; an estimate that failed has value null, its error and its code')
    .addHelpText('after', exitCodesHelp)
    .action(async (file: string, options: { columns?: string; estimator?: string[]; bits?: boolean; json?: boolean; unit?: string; reference?: string; estimatorModule?: string[]; xColumns?: string; yColumns?: string; against?: string }) => {
      const base: Base = options.bits ? 'bits' : 'nats';
      const reference = options.reference === undefined ? undefined : parseReference(options.reference);
      if (options.estimatorModule?.length) {
        const note = describeRegistration(await useEstimatorModules(options.estimatorModule.map((m) => resolveModulePath(m))));
        if (note && !options.json) printErr(note);
      }
      let quantity: Quantity = 'entropy';
      let loaded = readSample(file, { columns: options.columns });
      let sample = loaded.sample;
      if (options.xColumns !== undefined || options.yColumns !== undefined) {
        if (options.xColumns === undefined || options.yColumns === undefined) throw new UsageError('mutual information needs both --x-columns and --y-columns');
        if (options.columns !== undefined) throw new UsageError('--columns cannot be combined with --x-columns/--y-columns');
        if (options.against !== undefined) throw new UsageError('--against (a divergence) cannot be combined with --x-columns/--y-columns (mutual information)');
        const x = readSample(file, { columns: options.xColumns });
        const y = readSample(file, { columns: options.yColumns });
        const overlap = x.columnNumbers.filter((c) => y.columnNumbers.includes(c));
        if (overlap.length) throw new UsageError(`--x-columns and --y-columns both name column ${overlap[0]}; X and Y must be different columns`);
        sample = joinColumns(x.sample, y.sample);
        loaded = { ...x, sample, columnNames: [...x.columnNames, ...y.columnNames], columnNumbers: [...x.columnNumbers, ...y.columnNumbers] };
        quantity = 'mutual-information';
      } else if (options.against !== undefined) {
        const q = readSample(options.against, { columns: options.columns });
        if (q.sample.dim !== sample.dim) throw new UsageError(`${options.against} has ${q.sample.dim} columns and ${file} has ${sample.dim}; a divergence compares samples of the same dimension`);
        sample = { ...sample, q: q.sample };
        quantity = 'divergence';
      }
      if (reference && quantity !== 'entropy') throw new UsageError('--reference applies to entropy; mutual information and divergences are already unit-free');
      const offset = reference ? meanLogReference(reference, sample) : 0;
      const named = Boolean(options.estimator?.length);
      const specs = named ? options.estimator! : defaultEstimatorsFor(sample.dim, quantity);
      if (!specs.length) throw new UsageError(`no ${quantity} estimator supports d = ${sample.dim}; see hhat estimators`);
      const configured = specs.map(parseEstimatorSpec);
      for (const c of configured) {
        if (c.estimator.quantity !== quantity) {
          throw new UsageError(`${c.estimator.id} estimates ${c.estimator.quantity}, but this call asks for ${quantity}${quantity === 'entropy' ? '' : ` (given by ${quantity === 'divergence' ? '--against' : '--x-columns/--y-columns'})`}`);
        }
        // Checked before estimating so that asking for the wrong dimension is a usage mistake (exit 2), not
        // a failure on the data; the default set only holds estimators that support the dimension.
        const [minDim, maxDim] = c.estimator.dims;
        if (sample.dim < minDim || sample.dim > maxDim) throw new UsageError(`${c.estimator.id} does not support d = ${sample.dim}; it needs ${dimsRange(c.estimator.dims)}`);
      }
      const records = estimateAll(sample, configured, base).map((r) => ({
        ...r,
        ...(reference ? { relative: r.value === null ? null : r.value + toBase(offset, base) } : {}),
      }));
      const label = unitLabel(base, options.unit, sample.dim);
      const failed = records.filter((r) => r.error);
      const hints = failed.some((r) => r.code === 'ties') ? describeRepeats(findRepeats(sample), loaded.columnNames) : [];
      // A default-set estimator that cannot run on these data is information about the data, not an error the
      // user made or asked to hear about; one the user named, or a default set with no value at all, is.
      const failedAsError = failed.length > 0 && (named || failed.length === records.length);
      if (options.json) {
        print(
          JSON.stringify(
            {
              n: sample.n,
              dim: sample.dim,
              ...(quantity !== 'entropy' ? { quantity } : {}),
              ...(sample.xDim !== undefined ? { xDim: sample.xDim } : {}),
              ...(sample.q ? { qN: sample.q.n } : {}),
              base,
              ...(options.unit ? { unit: options.unit, label } : {}),
              ...(reference ? { reference: describeReference(reference), meanLogReference: toBase(offset, base) } : {}),
              columns: loaded.columnNames,
              estimates: records,
              ...(hints.length ? { repeats: hints } : {}),
            },
            null,
            2,
          ),
        );
      } else {
        print(`${file}: n = ${sample.n}, d = ${sample.dim}${loaded.columnNames.length ? ` (columns ${loaded.columnNames.join(', ')})` : ''}`);
        const rows = records.map((r) => [
          r.estimator,
          Object.entries(r.settings)
            .map(([k, v]) => `${k}=${v}`)
            .join(', ') || '–',
          r.value === null ? `failed (${r.code})` : formatValue(r.value, 7),
          ...(reference ? [r.relative === null || r.relative === undefined ? 'failed' : formatValue(r.relative, 7)] : []),
        ]);
        const head = ['estimator', 'settings used', `${quantity === 'entropy' ? 'entropy' : quantity} (${quantity === 'entropy' ? label : base})`, ...(reference ? [`relative to ${describeReference(reference)} (${base})`] : [])];
        print(renderTable(head, rows, { align: ['left', 'left', 'right', 'right'] }));
        // Failures that are not errors go with the table, so saved output explains its own "failed" rows;
        // errors go to stderr alone, so a terminal does not show each reason twice.
        if (!failedAsError) {
          for (const r of failed) print(`failed: ${failureLine(r)}`);
          if (hints.length) print(['repeated values in the data:', ...hints.map((h) => `  ${h}`)].join('\n'));
        }
      }
      if (!failed.length) return;
      if (failedAsError) {
        for (const r of failed) printErr(`hhat: ${failureLine(r)}`);
        for (const h of hints) printErr(`  ${h}`);
        if (!named) printErr(`hhat: none of the ${records.length} default estimators could run on this data`);
        process.exitCode = 1;
      } else {
        printErr(
          `hhat: note: ${failed.length} of the ${records.length} default estimators could not run on this data (${failed.map((r) => r.estimator).join(', ')}), ` +
            'which leaves the exit code at 0; name an estimator with --estimator to make its failure an error',
        );
      }
    });
}

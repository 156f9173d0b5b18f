import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import type { RecordedFacts, Scenario, SerialDependence, TransferFacts } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { parseIntegerOption } from '../core/options.js';
import { countOf, formatValue, fullIds, renderTable, shorten, toBase, type Base } from '../core/format.js';
import { catalog, parseScenario } from '../../scenarios/index.js';

export interface ScenarioRecord {
  id: string;
  family: string;
  dim: number;
  params: Record<string, number>;
  quantity: string;
  truth: number;
  unit: Base;
  truthSource: string;
  numericTruth: boolean;
  support: string;
  tails: string;
  logDensityVariance: number | null;
  logDensityVarianceSource: string | null;
  /** Only on autocorrelated[...] scenarios: the serial dependence of the rows. */
  dependence?: SerialDependence;
  /** Only on transfer-entropy scenarios: the other direction's value, the spectral radius and covariances. */
  transfer?: TransferFacts;
  /** Only on recorded[...] scenarios: the lattice and, for 1-D laws, the exact entropy of the recorded values. */
  recorded?: RecordedFacts;
}

export function scenarioRecord(s: Scenario, base: Base): ScenarioRecord {
  const variance = s.logDensityVariance;
  return {
    id: s.id,
    family: s.family,
    dim: s.dim,
    params: s.params,
    quantity: s.quantity,
    truth: toBase(s.truth, base),
    unit: base,
    truthSource: s.truthSource,
    numericTruth: s.truthSource.startsWith('numeric'),
    support: s.support,
    tails: s.tails,
    // Var(log f) scales with the base squared.
    logDensityVariance: variance === undefined ? null : base === 'bits' ? variance / (Math.LN2 * Math.LN2) : variance,
    logDensityVarianceSource: s.logDensityVarianceSource ?? null,
    ...(s.dependence && { dependence: s.dependence }),
    ...(s.recorded && {
      recorded: {
        steps: s.recorded.steps,
        base: s.recorded.base,
        discreteEntropy: s.recorded.discreteEntropy === null ? null : toBase(s.recorded.discreteEntropy, base),
        latticeEntropy: s.recorded.latticeEntropy === null ? null : toBase(s.recorded.latticeEntropy, base),
        source: s.recorded.source,
      },
    }),
    ...(s.transfer && { transfer: { ...s.transfer, forward: toBase(s.transfer.forward, base), reverse: toBase(s.transfer.reverse, base) } }),
  };
}

/** Specs up to this length sit in the table; longer ones are printed whole under it (a 9-D covariance runs to hundreds of characters). */
const SPEC_COLUMN_WIDTH = 64;

const TAILS = ['light', 'exponential', 'heavy'];
const SUPPORTS = ['bounded', 'half', 'unbounded'];

export function registerScenariosCommand(program: Command, print: (text: string) => void): void {
  program
    .command('scenarios')
    .description(COMMANDS.scenarios)
    .argument('[spec...]', 'show these scenarios (e.g. gamma:shape=3 "product[normal;laplace]") instead of the catalog')
    .option('--json', 'print a JSON array instead of a table')
    .option('--bits', 'true values in bits instead of nats')
    .option('--dim <d>', 'only scenarios of this dimension')
    .option('--tails <class>', `only this tail class: ${TAILS.join(' | ')}`)
    .option('--support <kind>', `only this support: ${SUPPORTS.join(' | ')}`)
    .option('--family <id>', 'only this family')
    .addHelpText(
      'after',
      `
Spec syntax:
  family[:key=value,...]            gamma:shape=2,scale=1 (omitted keys take defaults)
  product[SPEC;SPEC;...]            independent coordinates, e.g. "product[normal;exponential:rate=2]"
  transformed[MAP;SPEC]             monotone map of a 1-D scenario, e.g. "transformed[sinh;normal]"
  gaussian-covariance[ROW;ROW;...]  any covariance, e.g. "gaussian-covariance[1,0.5;0.5,2]"
  autocorrelated[phi=φ;SPEC]        rows as a stationary Gaussian AR(1) series (−1 < φ < 1) mapped to SPEC's
                                    law: same marginals and truth, rows in time order, e.g.
                                    "autocorrelated[phi=0.9;gamma:shape=2]"
  gaussian-mixture-mv[W:MEAN:COV;...] a d-dimensional Gaussian mixture (what hhat advise fits), e.g.
                                    "gaussian-mixture-mv[0.4:0,0:1,0.5,0.5,1;0.6:3,3:1,0,0,2]"
  recorded[step=Δ;SPEC]             SPEC rounded to a lattice of step Δ (one per coordinate: Δ1/Δ2/…, 0 leaves
                                    one as drawn); truth: the unrounded law's, e.g. "recorded[step=0.01;normal]"
  cmi-gaussian-covariance[DX,DY;ROW;...]  conditional MI of a Gaussian (X, Y, Z) with any covariance: X the
                                    first DX coordinates, Y the next DY, Z the rest, e.g.
                                    "cmi-gaussian-covariance[1,1;1,0.5,0.3;0.5,1,0.4;0.3,0.4,1]"
Quote specs with brackets or semicolons in the shell.`,
    )
    .action((specs: string[], options: { json?: boolean; bits?: boolean; dim?: string; tails?: string; support?: string; family?: string }) => {
      const base: Base = options.bits ? 'bits' : 'nats';
      let list = specs.length ? specs.map(parseScenario) : catalog();
      if (options.dim !== undefined) {
        const dim = parseIntegerOption('--dim', options.dim, 1);
        list = list.filter((s) => s.dim === dim);
      }
      if (options.tails !== undefined) {
        if (!TAILS.includes(options.tails)) throw new UsageError(`--tails ${options.tails} is not allowed; use one of ${TAILS.join(', ')}`);
        list = list.filter((s) => s.tails === options.tails);
      }
      if (options.support !== undefined) {
        if (!SUPPORTS.includes(options.support)) throw new UsageError(`--support ${options.support} is not allowed; use one of ${SUPPORTS.join(', ')}`);
        list = list.filter((s) => s.support === options.support);
      }
      if (options.family !== undefined) {
        const families = [...new Set(catalog().map((s) => s.family))].sort();
        if (!families.includes(options.family)) throw new UsageError(`--family ${options.family} is not allowed; use one of ${families.join(', ')}`);
        list = list.filter((s) => s.family === options.family);
      }
      const records = list.map((s) => scenarioRecord(s, base));
      if (options.json) {
        print(JSON.stringify(records, null, 2));
        return;
      }
      const ids = fullIds(
        records.map((r) => r.id),
        SPEC_COLUMN_WIDTH,
        (_, number) => `see [${number}] below`,
      );
      const rows = records.map((r, i) => [ids.cells[i], r.dim, formatValue(r.truth, 7), r.support, r.tails, shorten(r.truthSource, 48)]);
      print(
        renderTable(['scenario', 'd', `truth (${base})`, 'support', 'tails', 'source of the truth'], rows, {
          align: ['left', 'right', 'right', 'left', 'left', 'left'],
        }),
      );
      for (const note of ids.notes) print(note);
      for (const r of records) {
        if (r.dependence)
          print(
            `${r.id}: rows are serially dependent: lag-1 autocorrelation φ = ${r.dependence.phi}, integrated autocorrelation time τ = ${formatValue(r.dependence.integratedAutocorrelationTime, 4)}, effective sample size n/τ (of the latent normal scores)`,
          );
      }
      for (const r of records) {
        if (r.transfer)
          print(
            `${r.id}: a time series (row order matters); the other direction's transfer entropy is ${formatValue(r.transfer.reverse, 7)} ${base} (k = ${r.params.history ?? 1}, l = ${r.params.sourceHistory ?? 1}), spectral radius ${formatValue(r.transfer.spectralRadius, 4)}`,
          );
      }
      for (const r of records) {
        if (!r.recorded) continue;
        if (r.recorded.latticeEntropy !== null)
          print(
            `${r.id}: the recorded values' own Shannon entropy is ${formatValue(r.recorded.discreteEntropy, 7)} ${base}; plus log Δ, what the lattice estimator estimates: ${formatValue(r.recorded.latticeEntropy, 7)} ${base}`,
          );
        else print(`${r.id}: the recorded values' own Shannon entropy is ${r.recorded.source}`);
      }
      print(`${countOf(records.length, 'scenario')}. Details of one: hhat scenarios --json SPEC`);
    });
}

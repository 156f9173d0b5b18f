/**
 * `hhat estimate` on recorded data: values repeated because they were rounded to a lattice when recorded. Where
 * the nearest-neighbour, kernel and spacing estimators meet zero distances, the command does not stop at the
 * refusal: it detects the recording step of each column (src/math/lattice.ts) and offers the estimators built
 * for such data, each labelled with how it treats the step: the same estimators with dequantize=auto (uniform
 * jitter within the step, seeded by the data), the lattice estimator (discrete entropy of the recorded values
 * plus the log of the step), and for mutual information the mixed-data estimators. Which of them is least
 * biased at the data's n and step is what `hhat advise FILE` measures.
 */
import type { Quantity, Sample } from '../core/contracts.js';
import { findRepeats } from '../data/index.js';
import { labelCodes, selectColumns } from '../core/sample.js';
import { detectSteps, type StepReport } from '../math/lattice.js';
import { dequantizedVariant, hasEstimator, parseEstimatorSpec, supportsDimension, type ConfiguredEstimator } from '../../estimators/index.js';

export interface RecordedColumn {
  name: string;
  step: number | null;
  method: StepReport['method'];
  detail: string;
  tiedValues: number;
}

export interface RecordedData {
  repeatedRows: number;
  columns: RecordedColumn[];
}

/** A choice for recorded data: the estimator and how it treats the recording step. */
export interface RecordedChoice {
  configured: ConfiguredEstimator;
  how: string;
}

const JITTER = 'jitter: uniform noise within the step, seeded by the data';
/** A discrete X in mutual information: at most this share of its rows distinct (a label, not a measurement). */
const LABEL_SHARE = 0.1;

/** The recording step of each column, when the sample repeats values and some column is on a lattice; else null. */
export function recordedData(sample: Sample, columnNames: readonly string[]): RecordedData | null {
  const repeats = findRepeats(sample);
  if (!repeats.columns.some((c) => c.tiedValues > 0)) return null;
  const steps = detectSteps(sample);
  if (!steps.some((s) => s.step !== null)) return null;
  return {
    repeatedRows: repeats.repeatedRows,
    columns: steps.map((s, j) => ({
      name: columnNames[j] ?? `column ${j + 1}`,
      step: s.step,
      method: s.method,
      detail: s.detail,
      tiedValues: repeats.columns[j].tiedValues,
    })),
  };
}

/**
 * The estimators to offer on recorded data: every given estimator that takes dequantize (once, with
 * dequantize=auto), then the lattice estimator when every column is on a lattice (entropy), or the mixed-data
 * estimators (mutual information; the discrete-continuous one when X is a label).
 */
export function recordedChoices(sample: Sample, quantity: Quantity, data: RecordedData, given: readonly ConfiguredEstimator[]): RecordedChoice[] {
  const choices: RecordedChoice[] = [];
  const seen = new Set(given.map((c) => c.spec));
  const add = (configured: ConfiguredEstimator | null, how: string) => {
    if (!configured || seen.has(configured.spec) || !supportsDimension(configured.estimator, sample.dim)) return;
    seen.add(configured.spec);
    choices.push({ configured, how });
  };
  for (const c of given) add(dequantizedVariant(c), JITTER);
  if (quantity === 'entropy' && data.columns.every((c) => c.step !== null) && hasEstimator('lattice')) {
    add(parseEstimatorSpec('lattice'), 'counts: discrete entropy of the recorded values plus the log of the step');
  }
  if (quantity === 'mutual-information') {
    if (hasEstimator('mi-mixed')) add(parseEstimatorSpec('mi-mixed'), 'ties as point masses: zero distances counted, not jittered (Gao et al. 2017)');
    const xDim = sample.xDim ?? 1;
    const labels = labelCodes(
      selectColumns(
        sample,
        Array.from({ length: xDim }, (_, j) => j),
      ).data,
      sample.n,
      xDim,
    ).count;
    if (labels <= LABEL_SHARE * sample.n && hasEstimator('mi-discrete-continuous')) {
      add(parseEstimatorSpec('mi-discrete-continuous'), `X as a label (${labels} values), Y continuous (Ross 2014)`);
    }
  }
  return choices;
}

/** One line per column on a lattice: "interval_s: values are multiples of 1e-06 (6 decimal places); 2270 tied". */
export function describeRecorded(data: RecordedData, n: number): string[] {
  const lines = data.columns.map((c) => `${JSON.stringify(c.name)}: ${c.detail}${c.tiedValues ? `; ${c.tiedValues} of ${n} values tied` : ''}`);
  if (data.repeatedRows) lines.push(`${data.repeatedRows} of ${n} rows repeat an earlier row exactly`);
  return lines;
}

/**
 * How verdicts read in every view (terminal tables, the HTML report, advice), so they say the same thing
 * everywhere: ranks ("1=" for a member of a best set of more than one, the ordinal rank below it, and the
 * reason for a rank not earned by comparison) and robustness verdicts with the unit of their value.
 */
import { formatValue, toBase, type Base } from '../core/format.js';
import type { RankEntry, Ranking } from '../analysis/ranking.js';
import type { RobustnessSection } from '../analysis/robustness.js';

export function bestSetSize(ranking: Ranking): number {
  return ranking.entries.filter((e) => e.best).length;
}

/** The rank as shown: "1", "1=", "4", "9 (failed 3/30)", "8 (error overflows)"; a ranked entry with a few allowed failures adds them. */
export function rankText(entry: RankEntry, ranking: Ranking): string {
  switch (entry.status) {
    case 'failed':
      return `${entry.rank} (failed ${entry.failures}/${entry.replicates})`;
    case 'unbounded-error':
      return `${entry.rank} (error overflows)`;
    default: {
      const shared = entry.best && bestSetSize(ranking) > 1 ? '=' : '';
      return `${entry.rank}${shared}${entry.failures ? ` (${entry.failures} failed)` : ''}`;
    }
  }
}

/**
 * Best-set members whose RMSE is at least twice the leader's: the set keeps them because their squared errors
 * vary too much across the replicates (a few large ones) to separate them, not because they are as good.
 * Saying so keeps "1=" from reading as a recommendation.
 */
export function wideBestSetMembers(ranking: Ranking): RankEntry[] {
  const best = ranking.entries.filter((e) => e.best);
  // The leader by RMSE among members without failures: an RMSE over the draws an estimator chose to answer is no yardstick.
  const whole = best.filter((e) => e.failures === 0);
  const leader = Math.min(...(whole.length ? whole : best).map((e) => e.rmse));
  return best.filter((e) => Number.isFinite(e.rmse) && e.rmse >= 2 * leader);
}

/** A note for a scenario's table naming such members, by estimator and the sample sizes where it happens. */
export function wideBestSetNote(rankings: Ranking[], label: (spec: string) => string): string | null {
  const where = new Map<string, number[]>();
  for (const ranking of rankings) for (const e of wideBestSetMembers(ranking)) where.set(e.estimator, [...(where.get(e.estimator) ?? []), ranking.n]);
  if (!where.size) return null;
  const counts = rankings.map((r) => r.comparedReplicates);
  const low = Math.min(...counts);
  const high = Math.max(...counts);
  const replicates = low === high ? `${low}` : `${low}–${high}`;
  const list = [...where.entries()].map(([spec, sizes]) => `${label(spec)} (n = ${sizes.join(', ')})`).join('; ');
  return `In the best set with at least twice the leader's RMSE: ${list}. Over ${replicates} replicates their squared errors vary too much to be told apart from the best, and no other member is shown (sign tests over every pair, Holm) to beat them on most of the draws where the two differ; more replicates would separate them if they are worse.`;
}

/** One line under a ranked table: the procedure, its level and the failure rule, as in the README. */
export function rankLegend(level: number, maxFailureRate: number): string {
  const pct = `${+(level * 100).toPrecision(6)}%`;
  const failures = maxFailureRate === 0 ? 'fails on any replicate' : `fails on more than ${+(maxFailureRate * 100).toPrecision(6)}% of replicates`;
  return `Rank "1=": in the best set at level ${pct}: mean squared error not shown to be above the best's (model confidence set on paired squared errors, Hansen, Lunde & Nason 2011) and no other member shown to beat it on most of the draws where the two differ (one-sided sign tests over every pair of members, Holm). An estimator that ${failures} of a cell is ranked last there.`;
}

export const COLUMN_TITLES: Record<string, string> = {
  rescale: 'rescale: unit drift',
  monotone: 'monotone: Δbias',
  affine: 'affine: Δbias',
  quantize: 'quantize: safe δ/σ',
  contaminate: 'outliers: per 1%',
  tuning: 'tuning spread',
};

/**
 * The worst value of a robustness column with its unit: "7e-16 nats", "0.46 SD", "0.01 SD" (the recording
 * step, in SDs), "0.29 nats". A quantize value of 0 means no step was safe: "<0.001 SD" when the smallest
 * step tried is known.
 */
export function robustnessValue(column: string, value: number | null, smallestStep?: number, options: ValueOptions = {}): string {
  if (value === null || !Number.isFinite(value)) return '';
  const base = options.base ?? 'nats';
  const inSd = (verdict: boolean) => (verdict && options.sd !== undefined && Number.isFinite(options.sd) ? ` (${formatValue(options.sd, 2)} SD)` : '');
  switch (column) {
    case 'rescale': {
      const drift = toBase(value, base);
      // Judged in nats when it passes (exact to rounding), in SDs otherwise: show the SDs where they decide.
      const shown = drift === 0 ? '0' : Math.abs(drift) >= 1e-3 ? formatValue(drift, 2) : drift.toExponential(0);
      return `${shown} ${base}${inSd(options.verdict !== undefined && options.verdict !== 'pass')}`;
    }
    case 'quantize':
      return value === 0 ? (smallestStep === undefined ? '<min' : `<${smallestStep} SD`) : `${value} SD`;
    case 'contaminate':
      return `${formatValue(toBase(value, base), 2)} ${base}${inSd(true)}`;
    default:
      return `${formatValue(value, 2)} SD`;
  }
}

/** How a robustness value is shown: the unit of entropies, the value in SDs (which the verdict is judged in), the verdict. */
export interface ValueOptions {
  base?: Base;
  sd?: number;
  verdict?: string;
}

/** A robustness verdict with its value and unit, e.g. "fail 11 SD", "fail 0.29 nats (3.1 SD)"; "–" where it does not apply. */
export function robustnessText(column: string, verdict: string, value: number | null, smallestStep?: number, options: ValueOptions = {}): string {
  return verdict === 'n/a' ? '–' : `${verdict} ${robustnessValue(column, value, smallestStep, { ...options, verdict })}`.trim();
}

/** The finest recording step a robustness section tried, in SDs (undefined when it tried none). */
export function smallestQuantizeStep(section: Pick<RobustnessSection, 'measures'>): number | undefined {
  const steps = section.measures.filter((m) => m.kind === 'quantize' && m.level !== null).map((m) => m.level!);
  return steps.length ? Math.min(...steps) : undefined;
}

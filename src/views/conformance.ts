/**
 * How conformance reports read: one line per check for the terminal, and JSON for machines (with the suite's
 * sizes and tolerances, so a reader knows what "pass" meant).
 */
import {
  type ConformanceReport,
  type CheckStatus,
  INVARIANCE_N,
  KNOWN_VALUE_N,
  KNOWN_VALUE_TOLERANCE,
  MAPPED_DATA_TOLERANCE,
  ROUNDING_TOLERANCE,
  CHECKED_RESCALINGS,
  SELF_DIVERGENCE_TOLERANCE,
} from '../analysis/conformance.js';

const STATUS_WORD: Record<CheckStatus, string> = { pass: 'pass', fail: 'FAIL', 'not-applicable': 'n/a' };

function count(report: ConformanceReport, status: CheckStatus): number {
  return report.checks.filter((c) => c.status === status).length;
}

/** A heading line per estimator, then one line per check: status, name, evidence. */
export function formatConformanceText(reports: readonly ConformanceReport[]): string {
  const width = Math.max(...reports.flatMap((r) => r.checks.map((c) => c.check.length)));
  const blocks = reports.map((report) => {
    const failed = count(report, 'fail');
    const tally = [
      `${count(report, 'pass')} pass`,
      ...(failed ? [`${failed} FAIL`] : []),
      ...(count(report, 'not-applicable') ? [`${count(report, 'not-applicable')} not applicable`] : []),
    ];
    const heading = `${report.spec} (${report.quantity}, samples from ${report.law}): ${failed ? 'fails' : 'passes'}: ${tally.join(', ')} (${(report.milliseconds / 1000).toFixed(1)} s)`;
    const lines = report.checks.map((c) => `  ${STATUS_WORD[c.status].padEnd(4)}  ${c.check.padEnd(width)}  ${c.evidence}`);
    return [heading, ...lines].join('\n');
  });
  return blocks.join('\n\n');
}

/** Estimator ids with the checks they failed, e.g. "my-knn: row-order, known-value". */
export function failedChecks(reports: readonly ConformanceReport[]): string[] {
  return reports
    .filter((r) => !r.passed)
    .map(
      (r) =>
        `${r.estimator}: ${r.checks
          .filter((c) => c.status === 'fail')
          .map((c) => c.check)
          .join(', ')}`,
    );
}

export function formatConformanceJson(reports: readonly ConformanceReport[], module: string | null): string {
  return JSON.stringify(
    {
      module,
      passed: reports.every((r) => r.passed),
      suite: {
        invarianceSampleSize: INVARIANCE_N,
        knownValueSampleSize: KNOWN_VALUE_N,
        roundingTolerance: ROUNDING_TOLERANCE,
        mappedDataTolerance: MAPPED_DATA_TOLERANCE,
        knownValueTolerancePerDimension: KNOWN_VALUE_TOLERANCE,
        selfDivergenceTolerancePerDimension: SELF_DIVERGENCE_TOLERANCE,
        scaleFactors: CHECKED_RESCALINGS,
      },
      estimators: reports,
    },
    null,
    2,
  );
}

/**
 * A comparison of two runs as a terminal table, Markdown for a pull-request comment, JSON, or JUnit XML for
 * CI systems (one testcase per cell; cells failing the policy are <failure>s).
 */
import { countOf, formatP, formatValue, renderTable } from '../core/format.js';

export { formatP } from '../core/format.js';
import { toJson } from '../analysis/results.js';
import {
  changeFound,
  failingCells,
  STATUS_ORDER,
  WILD_FACTOR,
  type CellComparison,
  type CellRef,
  type CellStatus,
  type Comparison,
  type FailOn,
  type RunSummary,
} from '../analysis/compare.js';

const STATUS_LABEL: Record<CellStatus, string> = {
  worse: 'worse',
  improved: 'improved',
  'changed-within-noise': 'changed, not significantly or within tolerance',
  unchanged: 'unchanged',
};

/**
 * A cell's status as shown. A changed cell that is neither worse nor improved says which: "within tolerance"
 * when a test found the change (p within the cell's test level) but the estimated change is within the
 * tolerance; otherwise, on the same draws, "accuracy change not significant" (the estimates did change), and on
 * different draws "no significant change". The JSON keeps the one status `changed-within-noise` for all three.
 */
function cellStatusLabel(c: CellComparison): string {
  if (c.status !== 'changed-within-noise') return STATUS_LABEL[c.status];
  if (changeFound(c)) return 'changed within tolerance';
  // On the same draws the estimates did change (they are not bit-identical); the tests did not find their accuracy
  // changed, which is not a finding that it is the same. On different draws every estimate differs, and nothing was found.
  return c.paired ? 'changed, accuracy change not significant' : 'no significant change';
}

function signed(x: number, digits = 3): string {
  if (!Number.isFinite(x)) return formatValue(x, digits);
  return x > 0 ? `+${formatValue(x, digits)}` : formatValue(x, digits);
}

/**
 * A change shown to the precision its standard error supports (two significant digits of the SE), so
 * rounding noise such as 1e-17 in an SD that cannot have moved prints as 0.
 */
function toSePrecision(value: number, se: number): string {
  if (!Number.isFinite(value) || !Number.isFinite(se) || se <= 0) return signed(value);
  // At most six significant digits of the value: an SE at rounding level (a constant shift) would ask for more.
  const cap = value !== 0 ? Math.max(0, 5 - Math.floor(Math.log10(Math.abs(value)))) : 12;
  const decimals = Math.min(12, cap, Math.max(0, 1 - Math.floor(Math.log10(se))));
  const text = value.toFixed(decimals);
  if (Number(text) === 0) return '0';
  return value > 0 ? `+${text}` : text;
}

function plusMinus(value: number, se: number): string {
  // A change no estimate measures (a side with every replicate failed) is no number, and an SE from one value none.
  if (!Number.isFinite(value)) return '–';
  if (!Number.isFinite(se)) return `${formatValue(value, 4)} ± –`;
  return `${toSePrecision(value, se)} ± ${formatValue(se, 2)}`;
}

/** Breaks a long spec after its ':' and between settings, so table cells wrap without hiding settings. */
function wrapSpec(text: string, width: number): string {
  if (text.length <= width) return text;
  const colon = text.indexOf(':');
  if (colon < 0) return text;
  const lines = [text.slice(0, colon + 1)];
  let line = '';
  for (const part of text.slice(colon + 1).split(',')) {
    if (line && line.length + part.length + 3 > width) {
      lines.push(`  ${line},`);
      line = part;
    } else {
      line = line ? `${line},${part}` : part;
    }
  }
  lines.push(`  ${line}`);
  return lines.join('\n');
}

function cellLabel(c: CellRef): string {
  return c.perturbation ? `${c.scenario} (${c.perturbation})` : c.scenario;
}

/** Changed cells first (worse, improved, within noise), then by scenario, estimator and n, for every format. */
function ordered(cells: CellComparison[]): CellComparison[] {
  return [...cells].sort(
    (a, b) =>
      STATUS_ORDER.indexOf(a.status) - STATUS_ORDER.indexOf(b.status) ||
      a.scenario.localeCompare(b.scenario) ||
      a.estimator.localeCompare(b.estimator) ||
      a.n - b.n ||
      (a.perturbation ?? '').localeCompare(b.perturbation ?? ''),
  );
}

const HEAD = [
  'status',
  'scenario',
  'estimator',
  'n',
  'RMSE base → new',
  'ΔRMSE ± SE',
  'Δbias ± SE',
  'ΔSD ± SE',
  'Δ squared error [CI]',
  'p',
  'draws worse/better',
  'cell p (Holm)',
  'failures',
];

function failuresText(c: CellComparison): string {
  const f = c.failures;
  if (f.base === f.next && !f.onlyNext) return String(f.next);
  const detail =
    f.onlyNext !== null ? ` (${f.onlyNext} new, ${f.onlyBase} fixed${f.p !== null ? `, p ${formatP(f.p)}` : ''})` : f.p !== null ? ` (p ${formatP(f.p)})` : '';
  return `${f.base} → ${f.next}${detail}`;
}

function row(c: CellComparison): string[] {
  const t = c.test;
  return [
    cellStatusLabel(c),
    cellLabel(c),
    c.estimator,
    String(c.n),
    `${formatValue(c.rmse.base.value, 4)} → ${formatValue(c.rmse.next.value, 4)}`,
    plusMinus(c.rmse.change, c.rmse.changeSe),
    plusMinus(c.bias.change, c.bias.changeSe),
    plusMinus(c.sd.change, c.sd.changeSe),
    t ? `${toSePrecision(t.difference, t.se)} [${toSePrecision(t.interval[0], t.se)}, ${toSePrecision(t.interval[1], t.se)}]` : '–',
    t ? formatP(t.p) : '–',
    c.sign ? `${c.sign.above}/${c.sign.below} (p ${formatP(c.sign.p)})` : '–',
    // A change found but estimated within the tolerance fails the size condition, so its adjusted p is 1: say why.
    c.adjustedP === null ? '–' : c.status === 'changed-within-noise' && changeFound(c) ? 'size ≤ tolerance' : formatP(c.adjustedP),
    failuresText(c),
  ];
}

/** The level of the intervals shown: each test runs at α split over the tests (Bonferroni). */
function intervalLevel(comparison: Comparison): string {
  return `${+((1 - comparison.testLevel) * 100).toPrecision(4)}%`;
}

function countsLine(comparison: Comparison): string {
  const { counts } = comparison;
  const parts = STATUS_ORDER.map((s) => `${counts[s]} ${STATUS_LABEL[s]}`);
  const extra = counts.added || counts.removed ? `; ${counts.added} only in the new run, ${counts.removed} only in the base run` : '';
  return `${parts.join(', ')}${extra}`;
}

function runLine(run: RunSummary): string {
  // A committed baseline keeps no date.
  return `${run.createdAt ? `${run.createdAt.slice(0, 16).replace('T', ' ')}, ` : ''}hhat ${run.hhatVersion}${run.commit ? `, commit ${run.commit.slice(0, 10)}${run.commit.length > 40 ? run.commit.slice(40) : ''}` : ''}, seed ${run.seed}, ${countOf(run.replicates, 'replicate')}`;
}

function pairingLine(comparison: Comparison): string {
  return `${comparison.pairing.paired ? 'Paired' : 'Unpaired'}: ${comparison.pairing.reason}.`;
}

function policyLine(comparison: Comparison): string {
  const alpha = +(1 - comparison.level).toPrecision(6);
  const tests = comparison.pairing.paired
    ? `any of three paired tests says so: the t test on the squared-error differences (and |ΔRMSE| exceeds the tolerance, ${comparison.tolerance.text}), the exact sign test on them (and the median change of |error| over all draws exceeds the tolerance), or the exact McNemar test on failures`
    : `Welch's t test on the squared errors (and |ΔRMSE| exceeds the tolerance, ${comparison.tolerance.text}) or Fisher's exact test on failures says so`;
  const k = comparison.pairing.paired ? 3 : 2;
  const exact = comparison.pairing.paired ? 'the sign and McNemar tests are' : "Fisher's test is";
  const m = comparison.testedCells;
  const sharing =
    m > 1
      ? `The tests share α = ${alpha} over the ${countOf(m, 'changed cell')} by Holm's step-down (the cell with the smallest p is held to α/${m}, the next to α/${m - 1}, …), then by Bonferroni over a cell's ${k} tests (the first cell's each at α/(${k}·${m}) = ${+(comparison.testLevel / m).toPrecision(3)}), so the chance that any cell whose estimates did not change in distribution is called worse or improved is at most α (approximately: the t test is a large-sample test; ${exact} exact).`
      : `The tests share α = ${alpha} by Bonferroni (${+comparison.testLevel.toPrecision(3)} each), so a cell whose estimates did not change in distribution is called worse or improved with probability at most α (approximately: the t test is a large-sample test; ${exact} exact).`;
  return `A cell is worse (or improved) when ${tests}; worse wins over improved. The tests are of no change; the tolerance applies to the estimated change, so a cell found to change by less is "within tolerance", and "worse" does not claim that the true change exceeds the tolerance. "cell p (Holm)" decides: worse or improved when it is at most α; the p column is the t test's own p, unadjusted, and the interval is at 1 − α/${k} = ${intervalLevel(comparison)}, Bonferroni over the cell's own tests without Holm's share over cells, so it can exclude 0 in a cell where the tests find no significant change. ${sharing} A new estimate more than ${WILD_FACTOR} times the base run's largest error away from the truth makes a cell worse on its own. ${comparison.pairing.paired ? 'RMSEs and changes ± SE are paired, over the replicates where both runs succeeded' : 'Changes ± SE are unpaired'}.`;
}

function refLines(title: string, refs: CellRef[]): string[] {
  return refs.length ? [`${title}: ${refs.map((r) => `${cellLabel(r)} ${r.estimator} n=${r.n}`).join('; ')}`] : [];
}

/** The terminal report: what was compared, whether paired, the counts, then a table of the changed cells. */
export function formatComparisonText(comparison: Comparison, labels = { base: 'base', next: 'new' }): string {
  const lines = [`${labels.base}: ${runLine(comparison.base)}`, `${labels.next}: ${runLine(comparison.next)}`, pairingLine(comparison), countsLine(comparison)];
  const changed = ordered(comparison.cells).filter((c) => c.status !== 'unchanged');
  if (changed.length) {
    const pct = intervalLevel(comparison);
    const head = HEAD.map((h) => (h === 'Δ squared error [CI]' ? `Δ sq. error [${pct} CI]` : h));
    // The failures column only when some cell has failures: it is the column most often all zeros.
    const keep = changed.some((c) => c.failures.base || c.failures.next) ? HEAD.length : HEAD.length - 1;
    const rows = changed.map((c) => {
      const r = row(c);
      r[1] = wrapSpec(r[1], 24);
      r[2] = wrapSpec(r[2], 24);
      return r.slice(0, keep);
    });
    const align: ('left' | 'right')[] = HEAD.map((_, i) => (i < 3 ? 'left' : 'right'));
    lines.push(renderTable(head.slice(0, keep), rows, { align: align.slice(0, keep) }));
  }
  if (comparison.counts.unchanged) lines.push(`${comparison.counts.unchanged} cell${comparison.counts.unchanged === 1 ? '' : 's'} unchanged.`);
  lines.push(...refLines('Only in the base run', comparison.removed), ...refLines('Only in the new run', comparison.added));
  lines.push(policyLine(comparison));
  return lines.join('\n');
}

/** Table cell text for GitHub-flavoured Markdown: pipes escaped, line breaks flattened. */
function md(text: string): string {
  return text.replace(/\\/g, '\\\\').replace(/\|/g, '\\|').replace(/\r?\n/g, ' ');
}

function code(text: string): string {
  return `\`${md(text).replace(/`/g, "'")}\``;
}

function markdownTable(head: string[], rows: string[][]): string[] {
  return [`| ${head.map(md).join(' | ')} |`, `|${head.map((_, i) => (i >= 3 ? ' ---: ' : ' --- ')).join('|')}|`, ...rows.map((r) => `| ${r.join(' | ')} |`)];
}

/** Markdown for a pull-request comment: a summary line, the changed cells in a table, the unchanged folded away. */
export function formatComparisonMarkdown(comparison: Comparison): string {
  const { counts } = comparison;
  const lines = [
    `**hhat compare: ${countsLine(comparison)}** (${comparison.pairing.paired ? 'paired' : 'unpaired'}, tolerance ${comparison.tolerance.text})`,
    '',
  ];
  lines.push(`${pairingLine(comparison)} Base: ${md(runLine(comparison.base))}. New: ${md(runLine(comparison.next))}.`, '');
  const sorted = ordered(comparison.cells);
  const changed = sorted.filter((c) => c.status !== 'unchanged');
  if (changed.length) {
    const pct = intervalLevel(comparison);
    const head = HEAD.map((h) => (h === 'Δ squared error [CI]' ? `Δ squared error [${pct} CI]` : h));
    const rows = changed.map((c) => {
      const r = row(c).map(md);
      r[0] = c.status === 'worse' ? '**worse**' : r[0];
      r[1] = code(cellLabel(c));
      r[2] = code(c.estimator);
      return r;
    });
    lines.push(...markdownTable(head, rows), '');
  } else {
    lines.push('No cell changed.', '');
  }
  const unchanged = sorted.filter((c) => c.status === 'unchanged');
  if (unchanged.length) {
    lines.push(`<details><summary>${counts.unchanged} unchanged cell${counts.unchanged === 1 ? '' : 's'}</summary>`, '');
    lines.push(
      ...markdownTable(
        ['scenario', 'estimator', 'n', 'RMSE'],
        unchanged.map((c) => [code(cellLabel(c)), code(c.estimator), String(c.n), md(formatValue(c.rmse.next.value, 4))]),
      ),
    );
    lines.push('', '</details>', '');
  }
  for (const [title, refs] of [
    ['Only in the base run', comparison.removed],
    ['Only in the new run', comparison.added],
  ] as const) {
    if (refs.length) lines.push(`${title}: ${refs.map((r) => `${code(cellLabel(r))} ${code(r.estimator)} n=${r.n}`).join(', ')}`, '');
  }
  lines.push(`<sub>${md(policyLine(comparison))}</sub>`);
  return lines.join('\n');
}

export function formatComparisonJson(comparison: Comparison): string {
  return toJson(comparison);
}

/** Characters XML 1.0 cannot carry at all (most C0 controls, lone surrogates, U+FFFE/U+FFFF) are dropped. */
const XML_INVALID = /[^\t\n\r\u0020-\uD7FF\uE000-\uFFFD\u{10000}-\u{10FFFF}]/gu;

export function escapeXml(text: string): string {
  return text.replace(XML_INVALID, '').replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&apos;');
}

function attributes(values: Record<string, string | number>): string {
  return Object.entries(values)
    .map(([k, v]) => ` ${k}="${escapeXml(String(v))}"`)
    .join('');
}

function testcaseName(c: CellRef): string {
  return `${c.estimator}@${c.n}${c.perturbation ? ` (${c.perturbation})` : ''}`;
}

function cellDetails(c: CellComparison): string {
  const t = c.test;
  const lines = [
    ...c.reasons,
    `RMSE ${formatValue(c.rmse.base.value)} → ${formatValue(c.rmse.next.value)} (${plusMinus(c.rmse.change, c.rmse.changeSe)})`,
    `bias ${formatValue(c.bias.base.value)} → ${formatValue(c.bias.next.value)} (${plusMinus(c.bias.change, c.bias.changeSe)})`,
    `SD ${formatValue(c.sd.base.value)} → ${formatValue(c.sd.next.value)} (${plusMinus(c.sd.change, c.sd.changeSe)})`,
    `failures ${failuresText(c)} of ${c.replicates.next}`,
  ];
  if (c.sign)
    lines.push(
      `sign test on squared-error differences: ${countOf(c.sign.above, 'replicate')} worse, ${c.sign.below} better, ${c.sign.ties} equal, p = ${formatP(c.sign.p)}; median change of |error| ${signed(c.medianChange ?? NaN, 3)} nats`,
    );
  for (const w of c.wild) lines.push(`wild estimate at replicate ${w.replicate}: ${w.next} (base ${w.base ?? 'failed'})`);
  if (c.adjustedP !== null)
    lines.push(`cell p adjusted (Bonferroni over its tests, Holm over the changed cells): ${formatP(c.adjustedP)}; each test held to ${formatP(c.testLevel)}`);
  if (t) {
    lines.push(
      `${t.kind === 'paired-t' ? 'paired t test' : "Welch's t test"} on squared errors: difference ${signed(t.difference, 4)}, SE ${formatValue(t.se, 3)}, ` +
        `${+(t.level * 100).toPrecision(6)}% interval [${signed(t.interval[0], 3)}, ${signed(t.interval[1], 3)}], t = ${formatValue(t.t, 4)}, df = ${formatValue(t.df, 4)}, p = ${formatP(t.p)}`,
    );
  }
  if (c.shift) lines.push(`mean shift of the estimates ${signed(c.shift.value, 4)} ± ${formatValue(c.shift.se, 2)} nats`);
  return lines.join('\n');
}

/**
 * JUnit XML: one <testsuite> holding one <testcase> per cell (classname = scenario, name = estimator@n);
 * cells failing the policy carry a <failure> with the numbers, the others a <system-out> with them, and
 * cells in only one run are <skipped>.
 */
export function formatComparisonJunit(comparison: Comparison, failOn: FailOn = 'worse', allowMissing = false): string {
  const failing = new Set(failingCells(comparison, failOn));
  const refsOnly = [
    ...comparison.removed.map((r) => ({ r, type: 'missing', where: 'only in the base run (missing from the new run)', fails: !allowMissing })),
    ...comparison.added.map((r) => ({ r, type: 'added', where: 'only in the new run', fails: failOn === 'changed' })),
  ];
  const failures = failing.size + refsOnly.filter((x) => x.fails).length;
  const skipped = refsOnly.length - refsOnly.filter((x) => x.fails).length;
  const tests = comparison.cells.length + refsOnly.length;
  const suite = { name: 'hhat compare', tests, failures, errors: 0, skipped, time: 0 };
  const out = ['<?xml version="1.0" encoding="UTF-8"?>', `<testsuites${attributes(suite)}>`, `  <testsuite${attributes(suite)}>`, '    <properties>'];
  const properties: Record<string, string> = {
    pairing: comparison.pairing.paired ? 'paired' : 'unpaired',
    'pairing-reason': comparison.pairing.reason,
    tolerance: comparison.tolerance.text,
    level: String(comparison.level),
    'fail-on': failOn,
    'base-fingerprint': comparison.base.fingerprint,
    'new-fingerprint': comparison.next.fingerprint,
  };
  for (const [name, value] of Object.entries(properties)) out.push(`      <property${attributes({ name, value })}/>`);
  out.push('    </properties>');
  for (const c of ordered(comparison.cells)) {
    const open = `    <testcase${attributes({ classname: cellLabel(c), name: testcaseName(c), time: 0 })}>`;
    const details = escapeXml(cellDetails(c));
    if (failing.has(c)) {
      out.push(
        open,
        `      <failure${attributes({ type: c.status, message: `${cellStatusLabel(c)}: ${c.reasons[0]}` })}>${details}</failure>`,
        '    </testcase>',
      );
    } else {
      out.push(open, `      <system-out>${cellStatusLabel(c)}: ${details}</system-out>`, '    </testcase>');
    }
  }
  for (const { r, type, where, fails } of refsOnly) {
    const open = `    <testcase${attributes({ classname: cellLabel(r), name: testcaseName(r), time: 0 })}>`;
    const body = fails ? `<failure${attributes({ type, message: `cell ${where}` })}/>` : `<skipped${attributes({ message: `cell ${where}` })}/>`;
    out.push(open, `      ${body}`, '    </testcase>');
  }
  out.push('  </testsuite>', '</testsuites>', '');
  return out.join('\n');
}

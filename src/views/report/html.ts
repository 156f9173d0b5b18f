/**
 * The report page: one self-contained HTML file. Styles and the table-sorting script are inline, fonts are
 * the system's, charts are inline SVG, and a Content-Security-Policy forbids every fetch, so opening the file
 * never touches the network. Tables scroll sideways on narrow screens; charts shrink to the screen width.
 */
import { createHash } from 'node:crypto';
import type { RenderedChart } from './svg.js';

export function escapeHtml(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
}

/** A table cell: shown text, plus the value the sort uses when the text is not plain (e.g. "0.12 ± 0.01"). */
export interface TableCell {
  text: string;
  sort?: number | string | null;
  title?: string;
  className?: string;
}

export type CellInput = TableCell | string | number;

function cellOf(input: CellInput): TableCell {
  return typeof input === 'object' ? input : { text: String(input), sort: typeof input === 'number' ? input : undefined };
}

export interface TableOptions {
  /** How many leading columns hold words (left-aligned); 1 to 3. */
  textColumns?: number;
  /** A long table: scrolls inside a box of at most 75% of the screen height. */
  tall?: boolean;
  /**
   * A wide table whose first two columns name each row (scenario, estimator): they keep their place, at a fixed
   * width with long names wrapped, while the numbers scroll sideways under them.
   */
  stickyNames?: boolean;
}

/** A table sortable by clicking its headers (the inline script below). */
export function sortableTable(caption: string, head: string[], rows: CellInput[][], options: TableOptions = {}): string {
  const textColumns = Math.min(3, Math.max(1, options.textColumns ?? 1));
  const th = head.map((h) => `<th scope="col"><button type="button">${escapeHtml(h)}</button></th>`).join('');
  const body = rows
    .map((row) => {
      const cells = row.map((input) => {
        const cell = cellOf(input);
        const attrs = [
          cell.sort !== undefined
            ? ` data-sort="${cell.sort === null || (typeof cell.sort === 'number' && !Number.isFinite(cell.sort)) ? '' : escapeHtml(String(cell.sort))}"`
            : '',
          cell.title ? ` title="${escapeHtml(cell.title)}"` : '',
          cell.className ? ` class="${escapeHtml(cell.className)}"` : '',
        ].join('');
        return `<td${attrs}>${escapeHtml(cell.text)}</td>`;
      });
      return `<tr>${cells.join('')}</tr>`;
    })
    .join('\n');
  return `<div class="table-wrap${options.tall ? ' tall' : ''}${options.stickyNames ? ' sticky-names' : ''}"><table class="sortable text-${textColumns}"><caption>${escapeHtml(caption)}</caption><thead><tr>${th}</tr></thead><tbody>\n${body}\n</tbody></table></div>`;
}

/** Charts wider than this keep their size on a phone and scroll sideways; shrunk to fit, their text would be too small to read. */
const WIDE_CHART = 450;

/** An inline chart; the SVG's own <title> labels it for screen readers. */
export function figure(chart: RenderedChart): string {
  const svg = chart.svg.replace('<svg ', `<svg role="img" aria-label="${escapeHtml(chart.title)}" data-chart="${escapeHtml(chart.name)}" `);
  const width = Number(/<svg[^>]*?\swidth="([\d.]+)"/.exec(chart.svg)?.[1] ?? 0);
  return `<figure class="chart${width > WIDE_CHART ? ' wide' : ''}" id="chart-${escapeHtml(chart.name)}">${svg}</figure>`;
}

export function definitionList(items: [string, string][]): string {
  return `<dl class="facts">${items.map(([k, v]) => `<div><dt>${escapeHtml(k)}</dt><dd>${escapeHtml(v)}</dd></div>`).join('')}</dl>`;
}

const STYLE = `
:root { color-scheme: light; --fg: #1b1b1b; --muted: #555; --line: #dcdcdc; --head: #f4f4f4; --accent: #0072B2; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--fg); background: #fff; font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; }
main { max-width: 1240px; margin: 0 auto; padding: 1rem clamp(0.6rem, 3vw, 2rem) 3rem; }
h1 { font-size: 1.5rem; margin: 0.4rem 0 0.2rem; }
h2 { font-size: 1.25rem; margin: 2.2rem 0 0.6rem; padding-top: 0.6rem; border-top: 2px solid var(--line); }
h3 { font-size: 1.05rem; margin: 1.8rem 0 0.4rem; overflow-wrap: anywhere; }
p { margin: 0.4rem 0; max-width: 80ch; }
.lead { color: var(--muted); }
a { color: var(--accent); }
dl.facts { display: grid; grid-template-columns: repeat(auto-fill, minmax(min(100%, 15rem), 1fr)); gap: 0.35rem 1.2rem; margin: 0.8rem 0; padding: 0.7rem 0.9rem; background: var(--head); border-radius: 6px; }
dl.facts div { min-width: 0; }
dt { font-size: 0.75rem; text-transform: uppercase; letter-spacing: 0.04em; color: var(--muted); }
dd { margin: 0; overflow-wrap: anywhere; }
nav ol { margin: 0.4rem 0; padding-left: 1.3rem; }
nav ol ol { columns: 20rem; column-gap: 2rem; }
nav li { overflow-wrap: anywhere; }
.charts { display: flex; flex-wrap: wrap; gap: 1rem 1.5rem; align-items: flex-start; }
figure.chart { margin: 0; min-width: 0; max-width: 100%; }
figure.chart svg { display: block; max-width: 100%; height: auto; }
.table-wrap { overflow-x: auto; margin: 0.8rem 0; max-width: 100%; }
.table-wrap.tall { max-height: 75vh; overflow-y: auto; }
table { border-collapse: collapse; font-size: 0.85rem; font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding: 0.3rem 0; caption-side: top; }
th, td { padding: 0.25rem 0.6rem; border-bottom: 1px solid var(--line); text-align: right; white-space: nowrap; }
th:first-child, td:first-child, .text-2 :is(th, td):nth-child(-n+2), .text-3 :is(th, td):nth-child(-n+3) { text-align: left; }
thead th { background: var(--head); position: sticky; top: 0; z-index: 2; }
.sticky-names { --name-1: min(15rem, 36vw); --name-2: min(12rem, 28vw); }
.sticky-names :is(th, td):nth-child(-n+2) { position: sticky; z-index: 1; background: #fff; white-space: normal; overflow-wrap: anywhere; }
.sticky-names :is(th, td):nth-child(1) { left: 0; width: var(--name-1); min-width: var(--name-1); max-width: var(--name-1); }
.sticky-names :is(th, td):nth-child(2) { left: var(--name-1); width: var(--name-2); min-width: var(--name-2); max-width: var(--name-2); box-shadow: inset -1px 0 var(--line); }
.sticky-names thead th:nth-child(-n+2) { z-index: 3; background: var(--head); }
th button { all: inherit; cursor: pointer; padding: 0; }
th button::after { content: " ↕"; color: #999; }
th[aria-sort="ascending"] button::after { content: " ↑"; color: var(--fg); }
th[aria-sort="descending"] button::after { content: " ↓"; color: var(--fg); }
@media screen and (max-width: 700px) {
  figure.chart.wide { overflow-x: auto; }
  figure.chart.wide svg { max-width: none; }
}
td.pass { background: #d8f0e7; } td.warn { background: #fbebc6; } td.fail { background: #f6d3c0; }
.note { font-size: 0.85rem; color: var(--muted); }
@media print {
  body { font-size: 10pt; }
  nav, .noprint { display: none; }
  main { max-width: none; padding: 0; }
  .table-wrap, .table-wrap.tall { overflow: visible; max-height: none; }
  thead th, .sticky-names :is(th, td):nth-child(-n+2) { position: static; }
  table { font-size: 7.5pt; }
  th, td { padding: 1px 4px; white-space: normal; }
  th button::after { content: ""; }
  figure.chart, tr, dl.facts { break-inside: avoid; }
  h2, h3 { break-after: avoid; }
  a { color: inherit; text-decoration: none; }
}
`;

/** Sorts by data-sort (or the text); numbers before words, blanks always last; a second click reverses. */
const SORT_SCRIPT = `
for (const table of document.querySelectorAll('table.sortable')) {
  const heads = Array.from(table.tHead.rows[0].cells);
  heads.forEach((th, column) => {
    th.querySelector('button').addEventListener('click', () => {
      const ascending = th.getAttribute('aria-sort') !== 'ascending';
      for (const h of heads) h.removeAttribute('aria-sort');
      th.setAttribute('aria-sort', ascending ? 'ascending' : 'descending');
      const key = (row) => {
        const cell = row.cells[column];
        const raw = cell ? (cell.dataset.sort !== undefined ? cell.dataset.sort : cell.textContent.trim()) : '';
        const number = Number(raw);
        return raw === '' || raw === '–' ? null : Number.isNaN(number) ? raw : number;
      };
      const body = table.tBodies[0];
      const rows = Array.from(body.rows).sort((a, b) => {
        const x = key(a), y = key(b);
        if (x === null || y === null) return x === y ? 0 : x === null ? 1 : -1;
        const order = typeof x === 'number' && typeof y === 'number' ? x - y : typeof x === 'number' ? -1 : typeof y === 'number' ? 1 : String(x).localeCompare(String(y));
        return ascending ? order : -order;
      });
      body.append(...rows);
    });
  });
}
`;

function sha256(text: string): string {
  return createHash('sha256').update(text).digest('base64');
}

export function page(title: string, body: string): string {
  // The policy allows exactly this page's style and script (by hash) and inline images, and nothing else.
  const csp = `default-src 'none'; style-src 'sha256-${sha256(STYLE)}'; script-src 'sha256-${sha256(SORT_SCRIPT)}'; img-src data:`;
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="${csp}">
<title>${escapeHtml(title)}</title>
<style>${STYLE}</style>
</head>
<body>
<main>
${body}
</main>
<script>${SORT_SCRIPT}</script>
</body>
</html>
`;
}

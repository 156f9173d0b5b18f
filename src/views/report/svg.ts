/**
 * Vega-Lite spec → static SVG, in Node: vega's headless View renders to an SVG string with no browser or
 * canvas. The SVG gets a <title> and <desc> (vega writes none) so a standalone file names its chart.
 */
import { parse, View, type LoggerInterface } from 'vega';
import { compile, type TopLevelSpec } from 'vega-lite';
import { useFontMetrics } from './text-metrics.js';

export interface RenderedChart {
  /** File-name stem, unique within a report. */
  name: string;
  title: string;
  svg: string;
}

export function escapeXml(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
}

/** Collects warnings (prefixed with the chart) instead of printing them: a report should not chatter, and tests can read them. */
function collectingLogger(warnings: string[], chart: string): LoggerInterface {
  let level = 2;
  const logger: LoggerInterface = {
    level(value?: number) {
      if (value === undefined) return level;
      level = value;
      return logger;
    },
    error(...args: readonly unknown[]) {
      warnings.push(`${chart}: error: ${args.map(String).join(' ')}`);
      return logger;
    },
    warn(...args: readonly unknown[]) {
      warnings.push(`${chart}: ${args.map(String).join(' ')}`);
      return logger;
    },
    info: () => logger,
    debug: () => logger,
  };
  return logger;
}

/** Puts <title> and <desc> first inside the root element, where SVG viewers and screen readers look. */
export function addTitle(svg: string, title: string, description: string): string {
  const end = svg.indexOf('>', svg.indexOf('<svg'));
  if (end < 0) throw new Error('vega returned no <svg> element');
  return `${svg.slice(0, end + 1)}<title>${escapeXml(title)}</title><desc>${escapeXml(description)}</desc>${svg.slice(end + 1)}`;
}

export async function renderChart(name: string, spec: TopLevelSpec, title: string, description: string, warnings: string[] = []): Promise<RenderedChart> {
  useFontMetrics();
  const logger = collectingLogger(warnings, name);
  const compiled = compile(spec, { logger }).spec;
  const view = new View(parse(compiled), { renderer: 'none', logger });
  try {
    const svg = await view.toSVG();
    return { name, title, svg: addTitle(svg, title, description) };
  } finally {
    view.finalize();
  }
}

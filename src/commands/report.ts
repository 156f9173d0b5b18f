import { resolve } from 'node:path';
import { COMMANDS } from './summaries.js';
import type { Command } from 'commander';
import type { Base } from '../core/format.js';
import { readRunFile } from '../analysis/results.js';
import { writeReport } from '../views/report/report.js';
import { refuseFolderOutput, refuseForeignOutput, refuseNonFolder, refuseSameFile } from '../core/files.js';

interface ReportCommandOptions {
  out?: string;
  svgDir?: string;
  bits?: boolean;
}

/** RUN.json → RUN.html beside it, unless --out says otherwise. */
export function defaultReportPath(runPath: string): string {
  return resolve(runPath.replace(/\.json$/i, '') + '.html');
}

export function registerReportCommand(program: Command, print: (text: string) => void): void {
  program
    .command('report')
    .description(COMMANDS.report)
    .argument('<run>', 'a run file written by `hhat bench` or `hhat merge`')
    .option('--out <file>', 'the HTML file to write (default: the run file name with .html)')
    .option('--svg-dir <dir>', 'also write each chart as a standalone SVG file in this folder')
    .option('--bits', 'show entropy values in bits instead of nats (the run file is always in nats)')
    .action(async (runPath: string, options: ReportCommandOptions) => {
      // readRunFile rejects other schema versions and broken files before anything is rendered or written.
      const run = readRunFile(runPath);
      const base: Base = options.bits ? 'bits' : 'nats';
      const out = options.out ? resolve(options.out) : defaultReportPath(runPath);
      if (options.out) refuseFolderOutput('--out', options.out, 'report.html');
      if (options.svgDir) refuseNonFolder('--svg-dir', options.svgDir);
      // A report written over its own run file (or over a data file named by mistake) would lose it.
      refuseSameFile(['the run file', runPath], ['--out', out]);
      refuseForeignOutput('--out', out, 'report', 'choose another --out (a report replaces only an HTML page)');
      const report = await writeReport(run, { base, out, svgDir: options.svgDir ? resolve(options.svgDir) : undefined });
      // None are expected: a warning from the chart compiler means a chart may be missing a mark.
      for (const warning of report.warnings) print(`warning: chart ${warning}`);
      print(`report: ${out} (${report.svgs.length} charts, rendered in ${(report.renderMs / 1000).toFixed(1)} s)`);
      if (options.svgDir) print(`charts: ${report.svgs.length} SVG files in ${resolve(options.svgDir)}`);
    });
}

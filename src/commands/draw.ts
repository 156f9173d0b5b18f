import { existsSync, statSync } from 'node:fs';
import { basename, dirname, extname, join, resolve } from 'node:path';
import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import type { Sample } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { isSpecialFile, removeLeftoverTemporaries, writeFileAtomic } from '../core/files.js';

/** A temporary untouched this long belongs to no live write. */
const STALE_TEMPORARY_MS = 60_000;
import { formatValue } from '../core/format.js';
import { checkSampleMemory } from '../core/memory.js';
import { MAX_REPLICATES, MAX_SAMPLE_SIZE, parseIntegerOption } from '../core/options.js';
import { DEFAULT_SEED } from '../core/rng.js';
import { csvChunks, jsonChunks, npyChunks, sampleColumnNames } from '../data/sample-write.js';
import { prepareDraw, type Draw } from '../harness/draw.js';
import { nonFiniteCount } from '../harness/draw-range.js';
import { parseScenario } from '../../scenarios/index.js';

type Format = 'npy' | 'csv' | 'json';
const FORMATS: readonly Format[] = ['npy', 'csv', 'json'];

interface DrawOptions {
  n: string;
  replicate?: string;
  replicates?: string;
  seed?: string;
  out: string;
  format?: string;
  split?: boolean;
  perturb?: string;
  json?: boolean;
}

/** What one written file holds. */
interface WrittenFile {
  path: string;
  /** sample (entropy, mutual information), p or q (a divergence's two samples), or p+q (both, in one JSON file). */
  contents: 'sample' | 'p' | 'q' | 'p+q';
  replicates: number[];
  /** The array's shape: (n, d), or (R, n, d) for stacked replicates (npy, JSON); CSV rows with a replicate column. */
  shape: number[];
}

/** "3", "0,4,7" or "0-9" (ranges inclusive), each index from 0, in the order given, without repeats. */
function parseReplicateList(text: string): number[] {
  const indices: number[] = [];
  for (const part of text.split(',')) {
    const range = /^\s*(\d+)\s*-\s*(\d+)\s*$/.exec(part);
    const [from, to] = range
      ? [parseIntegerOption('--replicate', range[1], 0, MAX_REPLICATES - 1), parseIntegerOption('--replicate', range[2], 0, MAX_REPLICATES - 1)]
      : [parseIntegerOption('--replicate', part, 0, MAX_REPLICATES - 1), undefined];
    if (to !== undefined && to < from)
      throw new UsageError(`--replicate ${part.trim()} is not allowed; a range runs from the smaller index to the larger (e.g. 0-9)`);
    for (let r = from; r <= (to ?? from); r++) if (!indices.includes(r)) indices.push(r);
    if (indices.length > MAX_REPLICATES) throw new UsageError(`--replicate ${text} names more than ${MAX_REPLICATES} replicates`);
  }
  return indices;
}

/** The replicates asked for, and whether they form a stack (several, or --replicates) or one n × d sample. */
function chosenReplicates(options: DrawOptions): { replicates: number[]; stacked: boolean } {
  if (options.replicate !== undefined && options.replicates !== undefined)
    throw new UsageError('give either --replicate (indices) or --replicates (a count: replicates 0 to R−1), not both');
  if (options.replicates !== undefined) {
    const count = parseIntegerOption('--replicates', options.replicates, 1, MAX_REPLICATES);
    return { replicates: Array.from({ length: count }, (_, r) => r), stacked: true };
  }
  const replicates = parseReplicateList(options.replicate ?? '0');
  return { replicates, stacked: replicates.length > 1 };
}

function chosenFormat(out: string, format: string | undefined): Format {
  if (format !== undefined) {
    if (!(FORMATS as readonly string[]).includes(format)) throw new UsageError(`--format ${format} is not allowed; use one of ${FORMATS.join(', ')}`);
    return format as Format;
  }
  const extension = extname(out).toLowerCase().slice(1);
  if ((FORMATS as readonly string[]).includes(extension)) return extension as Format;
  throw new UsageError(
    `--out ${out} ${extension ? `has extension ".${extension}"` : 'has no extension'}; name a .npy, .csv or .json file, or give --format npy|csv|json`,
  );
}

/** The output path, refused now (exit 2) when its folder is missing or it is a folder, rather than after drawing. */
function checkedOut(out: string): string {
  const path = resolve(out);
  const folder = dirname(path);
  if (!existsSync(folder)) throw new UsageError(`--out ${out}: the folder ${folder} does not exist; create it first or choose another --out`);
  if (!statSync(folder).isDirectory()) throw new UsageError(`--out ${out}: ${folder} is a file, not a folder`);
  if (existsSync(path) && statSync(path).isDirectory())
    throw new UsageError(`--out ${out} is a folder; give a file's path, e.g. --out ${join(out, 'draws.npy')}`);
  return path;
}

/** draws.npy + "-3" → draws-3.npy (the suffix goes before the extension, or at the end without one). */
export function withSuffix(path: string, suffix: string): string {
  const extension = extname(basename(path));
  return extension ? `${path.slice(0, -extension.length)}${suffix}${extension}` : `${path}${suffix}`;
}

/** One replicate's P (or only) sample, or its Q sample. */
function part(sample: Sample, which: 'p' | 'q'): Sample {
  if (which === 'p') return sample;
  if (!sample.q) throw new Error('a divergence scenario drew no Q sample');
  return sample.q;
}

interface FilePlan extends WrittenFile {
  chunks: () => Iterable<string | Uint8Array>;
}

/** The files to write: per replicate (split) or one stack; for a divergence in npy or CSV, P and Q apart. */
function planFiles(draw: Draw, out: string, format: Format, replicates: number[], stacked: boolean, split: boolean, head: Record<string, unknown>): FilePlan[] {
  const { scenario, n } = draw;
  const divergence = scenario.quantity === 'divergence';
  const information =
    scenario.quantity === 'mutual-information' || scenario.quantity === 'conditional-mutual-information' || scenario.quantity === 'transfer-entropy';
  const names = sampleColumnNames(scenario.dim, information ? scenario.xDim : undefined, scenario.yDim);
  const groups: { path: string; replicates: number[]; stacked: boolean }[] = split
    ? replicates.map((r) => ({ path: withSuffix(out, `-${r}`), replicates: [r], stacked: false }))
    : [{ path: out, replicates, stacked }];
  const files: FilePlan[] = [];
  for (const group of groups) {
    const shape = group.stacked ? [group.replicates.length, n, scenario.dim] : [n, scenario.dim];
    if (format === 'json') {
      const labelled = function* () {
        for (const r of group.replicates) {
          const sample = draw.sample(r);
          yield { replicate: r, dim: sample.dim, data: sample.data, ...(sample.q ? { q: { dim: sample.q.dim, data: sample.q.data } } : {}) };
        }
      };
      files.push({
        path: group.path,
        contents: divergence ? 'p+q' : 'sample',
        replicates: group.replicates,
        shape,
        chunks: () => jsonChunks({ ...head, replicates: group.replicates, columns: names }, labelled()),
      });
      continue;
    }
    for (const which of divergence ? (['p', 'q'] as const) : (['p'] as const)) {
      const samples = function* () {
        for (const r of group.replicates) {
          const sample = part(draw.sample(r), which);
          yield { replicate: r, dim: sample.dim, data: sample.data };
        }
      };
      files.push({
        path: which === 'q' ? withSuffix(group.path, '-q') : group.path,
        contents: divergence ? which : 'sample',
        replicates: group.replicates,
        shape: format === 'csv' ? [group.replicates.length * n, scenario.dim + (group.stacked ? 1 : 0)] : shape,
        chunks: () =>
          format === 'npy'
            ? npyChunks(
                shape,
                (function* () {
                  for (const s of samples()) yield s.data;
                })(),
              )
            : csvChunks(names, samples(), group.stacked),
      });
    }
  }
  return files;
}

/** "0–9", "3" or "0, 4, 7". */
function describeReplicates(replicates: number[]): string {
  const consecutive = replicates.every((r, i) => i === 0 || r === replicates[i - 1] + 1);
  if (replicates.length > 2 && consecutive) return `${replicates[0]}–${replicates[replicates.length - 1]}`;
  return replicates.join(', ');
}

/** What the draw is: the fields of --json, and the head of a JSON output file. */
function drawRecord(draw: Draw): Record<string, unknown> {
  const { scenario } = draw;
  return {
    scenario: scenario.id,
    family: scenario.family,
    quantity: scenario.quantity,
    n: draw.n,
    dim: scenario.dim,
    ...(scenario.quantity === 'mutual-information' || scenario.quantity === 'transfer-entropy' ? { xDim: scenario.xDim } : {}),
    ...(scenario.quantity === 'conditional-mutual-information' ? { xDim: scenario.xDim, yDim: scenario.yDim } : {}),
    seed: draw.seed,
    truth: draw.truth,
    unit: 'nats',
    truthSource: draw.truthSource,
    perturbation: draw.perturbation,
  };
}

const MAX_LISTED_FILES = 8;

function printSummary(draw: Draw, replicates: number[], files: WrittenFile[], format: Format, print: (text: string) => void): void {
  const { scenario } = draw;
  const group = (letter: string, width: number): string => (width === 1 ? `${letter}1` : `${letter}1..${letter}${width}`);
  const layout =
    scenario.quantity === 'conditional-mutual-information'
      ? `: X = ${group('x', scenario.xDim!)}, Y = ${group('y', scenario.yDim!)}, Z = ${group('z', scenario.dim - scenario.xDim! - scenario.yDim!)}`
      : scenario.quantity === 'transfer-entropy'
        ? ': a time series, rows in time order; source x1, target y1'
        : scenario.quantity === 'mutual-information'
          ? `: X = ${scenario.xDim === 1 ? 'x1' : `x1..x${scenario.xDim}`}, Y = ${scenario.dim - scenario.xDim! === 1 ? 'y1' : `y1..y${scenario.dim - scenario.xDim!}`}`
          : scenario.quantity === 'divergence'
            ? ', samples from P and from Q'
            : '';
  print(`scenario    ${scenario.id} (${scenario.quantity}, d = ${scenario.dim}${layout})`);
  if (draw.perturbation) {
    const p = draw.perturbation;
    print(`perturbed   ${p.spec}: truth ${formatValue(p.truthBefore, 10)} ${p.shift < 0 ? '−' : '+'} ${formatValue(Math.abs(p.shift), 10)} (${p.shiftSource})`);
  }
  print(`truth       ${formatValue(draw.truth, 10)} nats (${draw.truthSource})`);
  print(
    `draws       n = ${draw.n}, seed ${draw.seed}, replicate${replicates.length === 1 ? '' : 's'} ${describeReplicates(replicates)} (numbered from 0, as in run files)`,
  );
  // Thousands of split files: the first few and the last stand for the rest (--json lists every one).
  const shown = files.length > MAX_LISTED_FILES ? [...files.slice(0, MAX_LISTED_FILES - 1), files[files.length - 1]] : files;
  for (const file of shown) {
    if (file === files[files.length - 1] && shown.length < files.length) print(`            … ${files.length - shown.length} more files`);
    const what = file.contents === 'sample' ? '' : file.contents === 'p+q' ? ' P and Q' : ` ${file.contents.toUpperCase()}`;
    const shape =
      format === 'csv' ? `${file.shape[0]} row${file.shape[0] === 1 ? '' : 's'}` : `(${file.shape.join(', ')})${format === 'npy' ? ' float64' : ''}`;
    print(`wrote       ${file.path}${what}: ${shape}`);
  }
}

/** `hhat draw`: the samples a plan's cell sees, written to files. */
function runDraw(spec: string, options: DrawOptions, print: (text: string) => void, printErr: (text: string) => void): void {
  const n = parseIntegerOption('--n', options.n, 1, MAX_SAMPLE_SIZE);
  const seed = options.seed === undefined ? DEFAULT_SEED : parseIntegerOption('--seed', options.seed, 0);
  const { replicates, stacked } = chosenReplicates(options);
  const out = checkedOut(options.out);
  const format = chosenFormat(options.out, options.format);
  // Before prepareDraw, which draws a first replicate to check its range.
  checkSampleMemory(`--n ${n}`, n, parseScenario(spec).dim);
  const prepared = prepareDraw({ scenario: spec, n, seed, perturbation: options.perturb, replicates: replicates.length, pilot: replicates[0] });
  // A law hhat cannot check in advance may still draw beyond the double range: said, not written silently.
  const outOfRange = new Set<number>();
  const draw: Draw = {
    ...prepared,
    sample: (r) => {
      const sample = prepared.sample(r);
      if (nonFiniteCount(sample) > 0) outOfRange.add(r);
      return sample;
    },
  };
  const head = { kind: 'hhat-draw', version: 1, ...drawRecord(draw) };
  const files = planFiles(draw, out, format, replicates, stacked, Boolean(options.split), head);
  if (isSpecialFile(out) && files.some((f) => f.path !== out)) {
    throw new UsageError(
      `--out ${out} is a device or pipe, and this draw writes files named after it (${files.find((f) => f.path !== out)!.path}); give a file's name`,
    );
  }
  for (const file of files) {
    // An interrupted draw leaves its temporary (a write of millions of rows can be stopped part way); the next
    // draw to the same file removes it, sparing one another process is writing now.
    removeLeftoverTemporaries(file.path, STALE_TEMPORARY_MS);
    writeFileAtomic(file.path, file.chunks());
  }
  const written: WrittenFile[] = files.map(({ path, contents, replicates: r, shape }) => ({ path, contents, replicates: r, shape }));
  if (options.json) print(JSON.stringify({ ...drawRecord(draw), replicates, format, files: written }, null, 2));
  else printSummary(draw, replicates, written, format, print);
  if (outOfRange.size) {
    const which = [...outOfRange].sort((a, b) => a - b);
    printErr(
      `hhat: warning: replicate${which.length === 1 ? '' : 's'} ${describeReplicates(which)} hold${which.length === 1 ? 's' : ''} values beyond ±1.8e308, written as ±Infinity: ${draw.perturbation ? `${draw.scenario.id} under ${draw.perturbation.spec}` : draw.scenario.id} leaves the double range there, and no estimator can take such a sample (README, "Draws beyond the double range")`,
    );
  }
}

export function registerDrawCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('draw')
    .description(COMMANDS.draw)
    .argument('<spec>', 'a scenario spec, as bench takes it (see `hhat scenarios`)')
    .requiredOption('--n <n>', 'the sample size of the cell')
    .option('--replicate <list>', 'replicate indices, from 0: one (3), a list (0,4,7) or a range (0-9); default 0')
    .option('--replicates <r>', 'replicates 0 to R−1, stacked (the replicates of a plan with --replicates R)')
    .option('--seed <s>', `the plan's base seed (default ${DEFAULT_SEED}, bench's default)`)
    .requiredOption('--out <file>', 'the file to write (.npy, .csv or .json); it is replaced if it exists')
    .option('--format <f>', 'npy, csv or json (default: from the extension of --out)')
    .option('--split', 'one file per replicate: FILE-R.npy (the index before the extension) instead of one stack')
    .option('--perturb <spec>', "a perturbation as bench's --perturb takes it (e.g. rescale:c=1000): the perturbed sample and the shifted truth")
    .option('--json', 'print what was drawn and written as one JSON object')
    .addHelpText(
      'after',
      `
The samples are those every estimator of the bench cell (scenario, n) sees in a plan with this seed: the same
per-replicate seed (SHA-256 of seed, scenario id, n and replicate index) and the same sampler. Replicates are
numbered from 0, as in run files (cells[].failures[].replicate); a plan with --replicates R has replicates
0 to R−1. bench's default seed is ${DEFAULT_SEED}.

Files:
  .npy   float64, little-endian, C order: shape (n, d) for one replicate, (R, n, d) for --replicates R or a list
  .csv   header x1..xd (mutual information: X's columns x1.., then Y's y1..); several replicates in one file
         get a first column "replicate"; numbers in the shortest form that reads back to the same double
  .json  {"kind": "hhat-draw", scenario, truth, truthSource, n, dim, xDim (mutual information; and yDim, conditional), seed, columns,
         "samples": [{"replicate": R, "data": [[...], ...], "q": [[...], ...] (divergence)}]}
A divergence D(P || Q) writes its sample from Q beside the one from P: FILE-q.npy (or -q.csv); JSON holds both.
With --split, replicate R goes to FILE-R.npy (and FILE-R-q.npy).

Examples:
  hhat draw normal --n 500 --replicates 30 --out draws.npy
  hhat draw "mi-gaussian:dimX=2,dimY=3,rho=0.6" --n 200 --replicate 4 --out mi.csv --json
  hhat draw "kl-gaussian:dim=3,shift=0.5" --n 1000 --replicate 0-9 --split --out kl.npy`,
    )
    .action((spec: string, options: DrawOptions) => runDraw(spec, options, print, printErr));
}

/**
 * What a new user meets in the first hour, as exact text: whole ids in tables, counts in the right number,
 * --quiet, the two files of a divergence, one-line messages that say what to do, standard input as a data
 * file, and resolved settings to four significant digits. Each check compares the characters printed.
 */
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { readRunFile } from '../src/analysis/results.js';
import { countOf, formatSetting, renderTable } from '../src/core/format.js';
import { sniffFormat } from '../src/data/index.js';
import { runCli as run } from './helpers/cli.js';
import { ensureBuilt } from './helpers/built.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-first-hour-'));
const bin = join(__dirname, '..', 'bin', 'hhat.js');
const fixtures = join(__dirname, 'fixtures');

/** The installed command with `input` on its standard input, as a shell pipe gives it. */
function hhat(args: string[], input?: Buffer | string): { code: number | null; out: string; err: string } {
  const result = spawnSync(process.execPath, [bin, ...args], { cwd: dir, input: input ?? '' });
  return { code: result.status, out: result.stdout.toString('utf8'), err: result.stderr.toString('utf8') };
}

/** A deterministic two-column sample (no generator: the text itself is the data), with a header. */
function twoColumns(n: number, shift = 0): { csv: string; rows: number[][] } {
  const rows = Array.from({ length: n }, (_, i) => [Math.sin(1.3 * i + 0.2) * 2 + shift, Math.cos(0.7 * i * i + 1) + 0.5 * Math.sin(i) + shift]);
  return { csv: `a,b\n${rows.map((r) => r.join(',')).join('\n')}\n`, rows };
}

const p = twoColumns(200);
const pCsv = join(dir, 'p.csv');
const qCsv = join(dir, 'q.csv');
writeFileSync(pCsv, p.csv);
writeFileSync(qCsv, twoColumns(300, 0.5).csv);

describe('item 1: tables never cut an id, a spec or a family; counts in the right number', () => {
  it('one long spec asked for is printed whole (under the table when it is wider than the column), and "1 scenario"', async () => {
    const spec =
      'gaussian-mixture:w1=0.5,mu1=0,sigma1=1,w2=0.1,mu2=-1,sigma2=0.1,w3=0.1,mu3=-0.5,sigma3=0.1,w4=0.1,mu4=0,sigma4=0.1,w5=0.1,mu5=0.5,sigma5=0.1,w6=0.1,mu6=1,sigma6=0.1';
    const { code, out } = await run(['scenarios', spec]);
    expect(code).toBe(0);
    expect(out.split('\n').slice(-3)).toEqual([`[1] ${spec}`, '1 scenario. Details of one: hhat scenarios --json SPEC', '']);
    expect(out).toContain('│ see [1] below │ 1 │     1.192764 │ unbounded │ light │');
  });

  it('a spec that fits keeps its cell whole (it was cut at 52 characters before), two are "2 scenarios"', async () => {
    const { out } = await run(['scenarios', 'mi-transformed-gaussian', 'normal']);
    expect(out).toContain('│ mi-transformed-gaussian:dimX=1,dimY=1,rho=0.5,within=0 │ 2 │    0.1438410 │ unbounded │ heavy │');
    expect(out).toContain('│ normal:mu=0,sigma=1                                    │ 1 │     1.418939 │ unbounded │ light │');
    expect(out).toContain('\n2 scenarios. Details of one: hhat scenarios --json SPEC\n');
  });

  it('the estimators table shows every id and family whole', async () => {
    const list = JSON.parse((await run(['estimators', '--json'])).out) as { id: string; family: string }[];
    const { out } = await run(['estimators']);
    const firstCells = out
      .split('\n')
      .filter((line) => /^│ \S/.test(line))
      .map((line) =>
        line
          .split('│')
          .slice(1, 3)
          .map((cell) => cell.trim()),
      );
    expect(firstCells.slice(1)).toEqual(list.map((e) => [e.id, e.family]));
    expect(out).toContain('│ mi-from-entropies            │ entropy-combination │');
    // The harness's settings, which no estimator declares: thin for all, dequantize for the families that take it.
    expect(out).toContain('Every estimator also takes thin=t');
    expect(out).toContain('The nearest-neighbour, kernel and spacing estimators also take dequantize=none|auto|STEP (default none)');
  });

  it('a wrapped column widens to its longest word instead of cutting it', () => {
    const table = renderTable(['family'], [['mutual-information-by-entropies'], ['a b c']], { wrap: [12] });
    expect(table.split('\n')).toEqual([
      '┌─────────────────────────────────┐',
      '│ family                          │',
      '├─────────────────────────────────┤',
      '│ mutual-information-by-entropies │',
      '│ a b c                           │',
      '└─────────────────────────────────┘',
    ]);
  });

  it('bench --detail prints a scenario spec wider than its column whole under the table', async () => {
    const out = join(dir, 'detail.json');
    const args = ['bench', '--scenario', 'mi-transformed-gaussian', '--estimator', 'ksg1', '--n', '50', '--replicates', '2', '--workers', '1', '--detail'];
    const printed = (await run([...args, '--no-chart', '--out', out, '--quiet'])).out;
    expect(printed).toBe(`${resolve(out)}\n`);
    const { out: shown } = await run([...args, '--no-chart', '--out', out, '--force']);
    expect(shown).toMatch(/\n│ see \[1\] below │ ksg1 {6}│ 50 │ .*\n└[─┴]+┘\n\[1\] mi-transformed-gaussian:dimX=1,dimY=1,rho=0\.5,within=0\n/);
  });

  it('counts', () => {
    expect([countOf(1, 'scenario'), countOf(0, 'cell'), countOf(3, 'entry', 'entries')]).toEqual(['1 scenario', '0 cells', '3 entries']);
  });
});

describe('item 2: every spec id that `hhat scenarios` prints can be copied back', () => {
  it('each id of the default listing (in its cell or under the table) resolves to the same scenario', async () => {
    const { out } = await run(['scenarios']);
    const lines = out.split('\n');
    const notes = new Map(
      lines.flatMap((line) => (/^\[(\d+)\] (.+)$/.exec(line) ? [[/^\[(\d+)\] (.+)$/.exec(line)![1], /^\[(\d+)\] (.+)$/.exec(line)![2]]] : [])),
    );
    const printed = lines
      .filter((line) => line.startsWith('│ '))
      .slice(1)
      .map((line) => {
        const cell = line.split('│')[1].trim();
        const note = /^see \[(\d+)\] below$/.exec(cell);
        return note ? notes.get(note[1])! : cell;
      });
    const catalog = JSON.parse((await run(['scenarios', '--json'])).out) as { id: string; params: Record<string, number>; truth: number }[];
    expect(lines).toContain(`${catalog.length} scenarios. Details of one: hhat scenarios --json SPEC`);
    expect(printed).toHaveLength(catalog.length);
    expect(notes.size).toBeGreaterThan(0); // the listing has specs too long for the column; they must round-trip too
    for (const [i, id] of printed.entries()) {
      expect(id).not.toContain('…');
      const { code, out: json } = await run(['scenarios', id, '--json']);
      expect(code, id).toBe(0);
      const [again] = JSON.parse(json) as typeof catalog;
      expect({ id: again.id, params: again.params, truth: again.truth }, id).toEqual({ id: catalog[i].id, params: catalog[i].params, truth: catalog[i].truth });
    }
  });
});

describe('item 3: --quiet prints only the run file path', () => {
  beforeAll(() => ensureBuilt(['src/commands/bench.ts', 'src/core/format.ts']));
  /** One cell: two replicates of the kernel estimator on 50 normal points. */
  const oneCell = ['bench', '--scenario', 'normal', '--estimator', 'kernel', '--n', '50', '--replicates', '2', '--workers', '1'];

  it('bench --quiet: stdout is the absolute path and a newline, stderr is empty', () => {
    const out = join(dir, 'quiet', 'run.json');
    expect(hhat([...oneCell, '--out', out, '--quiet'])).toEqual({ code: 0, out: `${resolve(out)}\n`, err: '' });
    expect(JSON.parse(readFileSync(out, 'utf8')).cells).toHaveLength(1);
    // Without --quiet the closing count says "1 cell ... 1 worker".
    expect(hhat([...oneCell, '--out', out, '--force']).out).toMatch(/\n1 cell in \d+\.\d s on 1 worker\nrun file: .*run\.json\n$/);
    // Resuming a finished run under --quiet prints the path too, and only it; that nothing ran is said on stderr.
    expect(hhat([...oneCell, '--out', out, '--resume', '--quiet'])).toEqual({
      code: 0,
      out: `${resolve(out)}\n`,
      err: `hhat: ${resolve(out)} is already a finished run of this plan; nothing to resume\n`,
    });
  });

  it('merge --quiet prints only the merged path', async () => {
    const shards = [1, 2].map((i) => join(dir, 'quiet', `shard-${i}.json`));
    for (const [i, shard] of shards.entries()) expect((await run([...oneCell, '--shard', `${i + 1}/2`, '--out', shard, '--quiet'])).code).toBe(0);
    const merged = join(dir, 'quiet', 'merged.json');
    expect(await run(['merge', ...shards, '--out', merged, '--quiet'])).toEqual({ code: 0, out: `${resolve(merged)}\n`, err: '' });
    // Never over one of its own shards, under another name for the same file included.
    const alias = join(dir, 'quiet', 'link-to-shard-1.json');
    symlinkSync(shards[0], alias);
    expect(await run(['merge', ...shards, '--out', alias, '--quiet'])).toEqual({
      code: 2,
      out: '',
      err: `hhat: --out ${alias} is one of the shards being merged (${shards[0]}); choose another --out\n`,
    });
    expect(readRunFile(shards[0]).shard).toEqual({ index: 1, count: 2 });
  });
});

describe('item 4: a divergence names both files', () => {
  it('--help says which file is P and which is Q', async () => {
    const { out } = await run(['estimate', '--help']);
    expect(out).toContain(
      '  --against <q-file>                estimate the divergence D(P‖Q) with P =\n                                    <file>, Q = <q-file>: the sample from Q,\n                                    read like <file>\n',
    );
    expect(out).toContain('--against, the sample from P');
  });

  it('the table header and the JSON name P and Q', async () => {
    const table = await run(['estimate', pCsv, '--against', qCsv, '--estimator', 'knn-divergence']);
    expect(table.code).toBe(0);
    const lines = table.out.split('\n');
    expect(lines[0]).toBe(`D(P‖Q) with P = ${pCsv} (n = 200), Q = ${qCsv} (n = 300); d = 2 (columns a, b)`);
    expect(lines[2]).toMatch(/^│ estimator +│ settings used │ D\(P‖Q\) \(nats\) │$/);
    const json = JSON.parse((await run(['estimate', pCsv, '--against', qCsv, '--estimator', 'knn-divergence', '--json'])).out);
    expect(json).toMatchObject({ n: 200, qN: 300, quantity: 'divergence', divergence: 'D(P‖Q)', pFile: pCsv, qFile: qCsv });
  });
});

describe("a divergence matches Q's columns to P's by name", () => {
  // Found by a tester: P (temp, pressure) against Q (pressure, temp) compared temperatures with pressures, exit 0.
  it('reorders Q when both files name the same columns in another order, and refuses names that differ', async () => {
    const q = twoColumns(300, 0.5);
    const swapped = join(dir, 'q-swapped.csv');
    writeFileSync(swapped, `b,a\n${q.rows.map(([a, b]) => `${b},${a}`).join('\n')}\n`);
    const value = async (qFile: string) =>
      (
        JSON.parse((await run(['estimate', pCsv, '--against', qFile, '--estimator', 'gaussian-divergence', '--json'])).out) as {
          estimates: { value: number }[];
        }
      ).estimates[0].value;
    expect(await value(swapped)).toBe(await value(qCsv));
    const renamed = join(dir, 'q-renamed.csv');
    writeFileSync(renamed, q.csv.replace(/^a,b/, 'x,y'));
    const refused = await run(['estimate', pCsv, '--against', renamed]);
    expect(refused.code).toBe(2);
    expect(refused.err).toMatch(/\(P\) has columns a, b and .*q-renamed\.csv \(Q\) has x, y; a divergence compares the same coordinates/);
  });
});

describe('item 5: messages say what to do', () => {
  const cases: [string, string[], number, string][] = [
    [
      'settings separated by semicolons',
      ['estimate', pCsv, '--estimator', 'kozachenko-leonenko:k=3;norm=max'],
      2,
      'hhat: estimator "kozachenko-leonenko:k=3;norm=max": separate its settings with commas, not semicolons: kozachenko-leonenko:k=3,norm=max',
    ],
    [
      'scenario parameters separated by semicolons',
      ['scenarios', 'normal:mu=1;sigma=2'],
      2,
      'hhat: scenario "normal:mu=1;sigma=2": separate its parameters with commas, not semicolons: normal:mu=1,sigma=2',
    ],
    ['a directory as the data file', ['estimate', dir], 2, `hhat: cannot read data file ${dir}: it is a directory`],
    [
      'an MI estimator without X and Y',
      ['estimate', pCsv, '--estimator', 'ksg1'],
      2,
      'hhat: ksg1 estimates mutual-information, but this call asks for entropy; for mutual-information, give --x-columns and --y-columns to choose X and Y among the columns (e.g. --x-columns 1 --y-columns 2)',
    ],
    [
      'a divergence estimator without Q',
      ['estimate', pCsv, '--estimator', 'knn-divergence'],
      2,
      'hhat: knn-divergence estimates divergence, but this call asks for entropy; for divergence, give --against Q-FILE, the sample from Q',
    ],
    [
      "a module's estimate that returns a string",
      ['estimate', pCsv, '--estimator-module', join(fixtures, 'string-estimate.mjs'), '--estimator', 'text-entropy'],
      1,
      'hhat: text-entropy: estimate must return a number (nats); it returned the string "1.5"',
    ],
  ];
  for (const [what, args, code, line] of cases) {
    it(what, async () => {
      const result = await run(args);
      expect(result.code).toBe(code);
      expect(result.err.split('\n')).toContain(line);
    });
  }

  it('plan files: allowed keys for an unknown one, invalid JSON by line and column, "an object"', async () => {
    const plan = (name: string, text: string) => {
      const path = join(dir, name);
      writeFileSync(path, text);
      return path;
    };
    const unknown = plan('unknown.json', '{"scenarios": ["normal"], "estimators": ["kernel"], "sizes": [100]}');
    expect((await run(['bench', '--plan', unknown])).err).toBe(
      `hhat: ${unknown}: sizes: unknown key, did you mean sampleSizes? (allowed: name, quantity, scenarios, estimators, sampleSizes, phi, replicates, seed, robustness, modules, commands, verdicts, limits)\n`,
    );
    const broken = plan('broken.json', '{\n  "scenarios": ["normal"],\n  "estimators": ["kernel"]\n  "sampleSizes": [100]\n}\n');
    expect(await run(['bench', '--plan', broken])).toEqual({
      code: 2,
      out: '',
      err: `hhat: ${broken} line 4, column 3: invalid JSON: expected ',' or '}' after an object value\n`,
    });
    const list = plan('list.json', '[1, 2]');
    expect((await run(['bench', '--plan', list])).err).toBe(`hhat: ${list}: the plan must be an object\n`);
    const badRobustness = plan('robustness.json', '{"scenarios": ["normal"], "estimators": ["kernel"], "robustness": 5}');
    expect((await run(['bench', '--plan', badRobustness])).err).toBe(`hhat: ${badRobustness}: robustness: must be an object or null\n`);
  });
});

describe('item 6: standard input as the data file', () => {
  beforeAll(() => ensureBuilt(['src/data/index.ts', 'src/commands/estimate.ts']));

  it('cat data.csv | hhat estimate - --json equals hhat estimate data.csv --json, byte for byte', () => {
    const fromFile = hhat(['estimate', pCsv, '--json']);
    const fromPipe = hhat(['estimate', '-', '--json'], p.csv);
    expect(fromFile.code).toBe(0);
    // No field differs: the entropy JSON names no file.
    expect(fromPipe).toEqual(fromFile);
  });

  it('JSON and .npy on standard input are recognised from their first bytes', () => {
    const json = JSON.stringify({ a: p.rows.map((r) => r[0]), b: p.rows.map((r) => r[1]) });
    const fromCsv = hhat(['estimate', pCsv, '--json', '--estimator', 'gaussian']).out;
    expect(hhat(['estimate', '-', '--json', '--estimator', 'gaussian'], json).out).toBe(fromCsv);
    // A version 1.0 .npy header (NumPy's format description, numpy.lib.format), little-endian float64, C order.
    const header = "{'descr': '<f8', 'fortran_order': False, 'shape': (200, 2), }";
    const padded = header.padEnd(118 - 1, ' ') + '\n';
    const preamble = Buffer.concat([
      Buffer.from([0x93]),
      Buffer.from('NUMPY'),
      Buffer.from([1, 0]),
      Buffer.from([padded.length, 0]),
      Buffer.from(padded, 'latin1'),
    ]);
    const npy = Buffer.concat([preamble, Buffer.from(Float64Array.from(p.rows.flat()).buffer)]);
    const npyOut = JSON.parse(hhat(['estimate', '-', '--json', '--estimator', 'gaussian'], npy).out);
    const csvOut = JSON.parse(fromCsv);
    // .npy has no column names; everything else is the same.
    expect({ ...npyOut, columns: csvOut.columns }).toEqual(csvOut);
    expect(npyOut.columns).toEqual(['column 1', 'column 2']);
  });

  it('the table names standard input; a divergence from a pipe differs from the file only in pFile', () => {
    expect(hhat(['estimate', '-', '--estimator', 'gaussian'], p.csv).out.split('\n')[0]).toBe('standard input: n = 200, d = 2 (columns a, b)');
    const fromFile = JSON.parse(hhat(['estimate', pCsv, '--against', qCsv, '--json']).out);
    const fromPipe = JSON.parse(hhat(['estimate', '-', '--against', qCsv, '--json'], p.csv).out);
    expect(fromPipe.pFile).toBe('-');
    expect({ ...fromPipe, pFile: pCsv }).toEqual(fromFile);
  });

  it('empty input and both samples from one pipe are refused in one line', () => {
    expect(hhat(['estimate', '-'], '')).toEqual({
      code: 2,
      out: '',
      err: 'hhat: standard input is empty; pipe a sample in (CSV/TSV/TXT, JSON or NumPy .npy)\n',
    });
    expect(hhat(['estimate', '-', '--against', '-'], p.csv).err).toBe(
      'hhat: FILE and --against cannot both be - (standard input holds one sample); name a file for one of them\n',
    );
    // A parse error names standard input and the line, as for a file.
    expect(hhat(['estimate', '-'], 'a,b\n1,2\n3,x\n').err).toMatch(/^hhat: standard input line 3, column 2/);
  });

  it('sniffFormat', () => {
    expect(sniffFormat(Buffer.from('\ufeff  [1, 2]'))).toBe('json');
    expect(sniffFormat(Buffer.from('\n{"x": [1]}'))).toBe('json');
    expect(sniffFormat(Buffer.from('# x y\n1 2\n'))).toBe('text');
    expect(sniffFormat(Buffer.from([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]))).toBe('npy');
  });
});

describe('item 7: resolved settings to 4 significant digits in tables, every digit in JSON', () => {
  it('the kernel bandwidth', async () => {
    const json = JSON.parse((await run(['estimate', pCsv, '--estimator', 'kernel', '--json'])).out);
    const bandwidth = json.estimates[0].settings.bandwidth as number;
    expect(String(bandwidth).replace(/^0\.|\./, '').length).toBeGreaterThan(4);
    const shown = String(Number(bandwidth.toPrecision(4)));
    const { out } = await run(['estimate', pCsv, '--estimator', 'kernel']);
    expect(out).toContain(`│ kernel    │ bandwidth=${shown}, scale=1 │`);
    expect(out).toContain('\nsettings used: to 4 significant digits; --json gives every digit\n');
  });

  it('formatSetting', () => {
    expect([0.41351855420001377, 1234.5678, 5, 'auto', 1e-7 / 3, 2.5].map(formatSetting)).toEqual(['0.4135', '1235', '5', 'auto', '3.333e-8', '2.5']);
    // A bandwidth on data near 1e300 is a double with no fraction, yet no count: it is rounded like the rest.
    expect([2.370793044575606e299, 2 ** 53 - 1, 2 ** 53 + 2].map(formatSetting)).toEqual(['2.371e+299', '9007199254740991', '9.007e+15']);
  });
});

mkdirSync(join(dir, 'quiet'), { recursive: true });

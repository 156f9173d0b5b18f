/**
 * `hhat draw`: the samples it writes are, byte for byte, the samples a bench cell's estimators receive (checked
 * against an estimator module that records what it is given), in every format and layout; NumPy reads the .npy
 * files as float64 C-order arrays equal to the CSV's numbers; usage mistakes are one line with exit 2.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseNpy, readSample } from '../src/data/index.js';
import { csvChunks } from '../src/data/sample-write.js';
import { parseScenario } from '../scenarios/index.js';
import { DEFAULT_SEED } from '../src/core/rng.js';
import { ensureBuilt } from './helpers/built.js';
import { runCli } from './helpers/cli.js';

const root = join(__dirname, '..');
const bin = join(root, 'bin', 'hhat.js');
const recorderModule = join(root, 'test', 'fixtures', 'draw-recorder.mjs');
const dir = mkdtempSync(join(tmpdir(), 'hhat-draw-'));

beforeAll(() => {
  ensureBuilt(['src/cli.ts', 'src/commands/draw.ts', 'src/harness/draw.ts', 'src/data/sample-write.ts', 'src/core/files.ts', 'src/harness/work.ts']);
});

function hhat(args: string[], env: Record<string, string> = {}): { code: number | null; out: string; err: string } {
  const result = spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8', cwd: dir, env: { ...process.env, ...env } });
  return { code: result.status, out: result.stdout, err: result.stderr };
}

/** The data bytes of a .npy file (after its header), as base64. */
function npyDataBase64(path: string): string {
  const bytes = readFileSync(path);
  const headerLength = bytes.readUInt16LE(8);
  return bytes.subarray(10 + headerLength).toString('base64');
}

interface Recorded {
  estimator: string;
  n: number;
  dim: number;
  xDim: number | null;
  data: string;
  q: { n: number; dim: number; data: string } | null;
}

interface RunCell {
  role: string;
  perturbation: string | null;
  shift: number | null;
  estimates: number[];
}

/** Runs a one-scenario bench with the recording estimator; returns what it recorded and the run file's cells. */
function benchRecording(name: string, scenario: string, quantity: string, extra: string[]): { recorded: Recorded[]; cells: RunCell[] } {
  const record = join(dir, `${name}.record.jsonl`);
  const out = join(dir, `${name}.run.json`);
  rmSync(record, { force: true });
  const res = hhat(
    [
      'bench',
      '--scenario',
      scenario,
      '--estimator',
      `draw-recorder-${quantity}`,
      '--estimator-module',
      recorderModule,
      '--replicates',
      '3',
      '--workers',
      '1',
      '--out',
      out,
      '--quiet',
      ...extra,
    ],
    { HHAT_DRAW_RECORD: record },
  );
  expect(res.code, res.err).toBe(0);
  const recorded = readFileSync(record, 'utf8')
    .trim()
    .split('\n')
    .map((line) => JSON.parse(line) as Recorded);
  const cells = (JSON.parse(readFileSync(out, 'utf8')) as { cells: RunCell[] }).cells;
  return { recorded, cells };
}

/** The recorder's value: the plain sum of the values in storage order, P then Q. */
function storageSum(...arrays: Float64Array[]): number {
  let total = 0;
  for (const data of arrays) for (let i = 0; i < data.length; i++) total += data[i];
  return total;
}

function float64(base64: string): Float64Array {
  const bytes = Buffer.from(base64, 'base64');
  return new Float64Array(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
}

describe('hhat draw writes the samples the estimators of a bench cell receive, bit for bit', () => {
  it('entropy (default seed on both sides), with a perturbation: every replicate and its perturbed copy', () => {
    const spec = 'gamma:shape=2,scale=1.5';
    const { recorded, cells } = benchRecording('entropy', spec, 'entropy', ['--n', '40', '--perturb', 'rescale:c=8', '--no-tuning', '--robustness-n', '40']);
    expect(recorded).toHaveLength(6);
    const plain = hhat(['draw', spec, '--n', '40', '--replicates', '3', '--split', '--out', 'entropy.npy', '--json']);
    expect(plain.code, plain.err).toBe(0);
    const shifted = hhat(['draw', spec, '--n', '40', '--replicates', '3', '--split', '--perturb', 'rescale:c=8', '--out', 'entropy-rescaled.npy', '--json']);
    expect(shifted.code, shifted.err).toBe(0);
    const main = cells.find((c) => c.role === 'main')!;
    const perturbed = cells.find((c) => c.role === 'perturbed')!;
    const drawn: string[] = [];
    for (let r = 0; r < 3; r++) {
      const original = npyDataBase64(join(dir, `entropy-${r}.npy`));
      const rescaled = npyDataBase64(join(dir, `entropy-rescaled-${r}.npy`));
      drawn.push(original, rescaled);
      // The run file's estimate of replicate r is the sum of the sample the recorder got as replicate r.
      expect(storageSum(float64(original))).toBe(main.estimates[r]);
      expect(storageSum(float64(rescaled))).toBe(perturbed.estimates[r]);
    }
    expect(new Set(recorded.map((x) => x.data))).toEqual(new Set(drawn));
    expect(drawn.every((b) => recorded.some((x) => x.data === b && x.n === 40 && x.dim === 1))).toBe(true);
    // The shifted truth is the run's: truth + log 8 (d = 1).
    const record = JSON.parse(shifted.out) as { seed: number; truth: number; perturbation: { shift: number; truthBefore: number } };
    expect(record.seed).toBe(DEFAULT_SEED);
    expect(record.perturbation.shift).toBe(perturbed.shift);
    expect(record.truth).toBe(parseScenario(spec).truth + Math.log(8));
  });

  it('mutual information: X then Y columns, as the estimator gets them (xDim given)', () => {
    const spec = 'mi-gaussian:dimX=2,dimY=1,rho=0.5';
    const { recorded, cells } = benchRecording('mi', spec, 'mutual-information', ['--n', '30', '--seed', '11']);
    expect(recorded).toHaveLength(3);
    const res = hhat(['draw', spec, '--n', '30', '--replicates', '3', '--seed', '11', '--out', 'mi.npy', '--json']);
    expect(res.code, res.err).toBe(0);
    const record = JSON.parse(res.out) as { xDim: number; dim: number; files: { shape: number[] }[] };
    expect(record).toMatchObject({ xDim: 2, dim: 3, files: [{ shape: [3, 30, 3] }] });
    const stacked = Buffer.from(npyDataBase64(join(dir, 'mi.npy')), 'base64');
    const perReplicate = 30 * 3 * 8;
    for (let r = 0; r < 3; r++) {
      const bytes = stacked.subarray(r * perReplicate, (r + 1) * perReplicate).toString('base64');
      const match = recorded.filter((x) => x.data === bytes);
      expect(match, `replicate ${r}`).toHaveLength(1);
      expect(match[0]).toMatchObject({ n: 30, dim: 3, xDim: 2 });
      expect(storageSum(float64(bytes))).toBe(cells[0].estimates[r]);
    }
  });

  it('divergence: the samples from P and from Q, in .npy pairs and in one JSON file', () => {
    const spec = 'kl-gaussian:dim=2,shift=0.5,sigma=1.5';
    const { recorded, cells } = benchRecording('kl', spec, 'divergence', ['--n', '25', '--seed', '5']);
    expect(recorded).toHaveLength(3);
    const res = hhat(['draw', spec, '--n', '25', '--replicate', '0-2', '--seed', '5', '--out', 'kl.npy']);
    expect(res.code, res.err).toBe(0);
    expect(res.out).toContain(`${join(dir, 'kl-q.npy')} Q: (3, 25, 2) float64`);
    const json = hhat(['draw', spec, '--n', '25', '--replicates', '3', '--seed', '5', '--out', 'kl.json']);
    expect(json.code, json.err).toBe(0);
    const file = JSON.parse(readFileSync(join(dir, 'kl.json'), 'utf8')) as { samples: { replicate: number; data: number[][]; q: number[][] }[] };
    const p = Buffer.from(npyDataBase64(join(dir, 'kl.npy')), 'base64');
    const q = Buffer.from(npyDataBase64(join(dir, 'kl-q.npy')), 'base64');
    const size = 25 * 2 * 8;
    for (let r = 0; r < 3; r++) {
      const pBytes = p.subarray(r * size, (r + 1) * size).toString('base64');
      const qBytes = q.subarray(r * size, (r + 1) * size).toString('base64');
      const match = recorded.filter((x) => x.data === pBytes);
      expect(match, `replicate ${r}`).toHaveLength(1);
      expect(match[0].q).toEqual({ n: 25, dim: 2, data: qBytes });
      expect(storageSum(float64(pBytes), float64(qBytes))).toBe(cells[0].estimates[r]);
      // The JSON file's numbers parse back to the same doubles.
      expect(Float64Array.from(file.samples[r].data.flat())).toEqual(float64(pBytes));
      expect(Buffer.from(Float64Array.from(file.samples[r].q.flat()).buffer).toString('base64')).toBe(qBytes);
    }
  });
});

describe('formats and layouts', () => {
  const spec = 'student-t-mv:dim=2,nu=3';

  it('one replicate: .npy (n, d) read by the project reader, CSV and JSON with the same doubles', () => {
    for (const name of ['one.npy', 'one.csv', 'one.json']) expect(hhat(['draw', spec, '--n', '50', '--replicate', '4', '--out', name]).code).toBe(0);
    const npy = parseNpy(readFileSync(join(dir, 'one.npy')));
    expect(npy).toMatchObject({ dtype: '<f8', shape: [50, 2] });
    const csv = readSample(join(dir, 'one.csv'));
    expect(csv.columnNames).toEqual(['x1', 'x2']);
    expect(Buffer.from(csv.sample.data.buffer).equals(Buffer.from(npy.sample.data.buffer))).toBe(true);
    const json = JSON.parse(readFileSync(join(dir, 'one.json'), 'utf8')) as {
      kind: string;
      replicates: number[];
      columns: string[];
      samples: { data: number[][] }[];
    };
    expect(json).toMatchObject({ kind: 'hhat-draw', replicates: [4], columns: ['x1', 'x2'] });
    expect(Float64Array.from(json.samples[0].data.flat())).toEqual(npy.sample.data);
  });

  it('a stack of replicates is the split files one after another; a stacked CSV has a replicate column', () => {
    expect(hhat(['draw', spec, '--n', '20', '--replicate', '2,0,7', '--out', 'stack.npy']).code).toBe(0);
    expect(hhat(['draw', spec, '--n', '20', '--replicate', '2,0,7', '--split', '--out', 'split.npy']).code).toBe(0);
    expect(hhat(['draw', spec, '--n', '20', '--replicate', '2,0,7', '--out', 'stack.csv']).code).toBe(0);
    expect(
      readdirSync(dir)
        .filter((f) => f.startsWith('split-'))
        .sort(),
    ).toEqual(['split-0.npy', 'split-2.npy', 'split-7.npy']);
    const parts = [2, 0, 7].map((r) => Buffer.from(npyDataBase64(join(dir, `split-${r}.npy`)), 'base64'));
    expect(Buffer.from(npyDataBase64(join(dir, 'stack.npy')), 'base64').equals(Buffer.concat(parts))).toBe(true);
    const csv = readSample(join(dir, 'stack.csv'), { columns: 'replicate,x1,x2' });
    expect(csv.columnNames).toEqual(['replicate', 'x1', 'x2']);
    for (let i = 0; i < 60; i++) expect(csv.sample.data[i * 3]).toBe([2, 0, 7][Math.floor(i / 20)]);
    const values = Float64Array.from({ length: 120 }, (_, k) => csv.sample.data[Math.floor(k / 2) * 3 + 1 + (k % 2)]);
    expect(Buffer.from(values.buffer).equals(Buffer.concat(parts))).toBe(true);
  });

  it('NumPy (an outside reader) loads the stacked .npy as float64, C order, shape (R, n, d), equal to the CSV read by Python', () => {
    expect(hhat(['draw', 'mi-gaussian:dimX=2,dimY=3,rho=0.6', '--n', '15', '--replicates', '4', '--seed', '3', '--out', 'numpy.npy']).code).toBe(0);
    expect(hhat(['draw', 'mi-gaussian:dimX=2,dimY=3,rho=0.6', '--n', '15', '--replicates', '4', '--seed', '3', '--out', 'numpy.csv']).code).toBe(0);
    const script = `
import csv, json, sys, numpy as np
a = np.load(sys.argv[1])
with open(sys.argv[2]) as f:
    rows = list(csv.reader(f))
header, body = rows[0], rows[1:]
b = np.array([[float(x) for x in row[1:]] for row in body]).reshape(4, 15, 5)
reps = sorted({int(row[0]) for row in body})
print(json.dumps({"shape": list(a.shape), "dtype": a.dtype.str, "c": bool(a.flags["C_CONTIGUOUS"]), "f": bool(np.isfortran(a)),
                  "equal": bool(np.array_equal(a, b)), "header": header, "reps": reps}))
`;
    const py = spawnSync('python3', ['-c', script, join(dir, 'numpy.npy'), join(dir, 'numpy.csv')], { encoding: 'utf8' });
    expect(py.status, py.stderr).toBe(0);
    expect(JSON.parse(py.stdout)).toEqual({
      shape: [4, 15, 5],
      dtype: '<f8',
      c: true,
      f: false,
      equal: true,
      header: ['replicate', 'x1', 'x2', 'y1', 'y2', 'y3'],
      reps: [0, 1, 2, 3],
    });
  });

  it('numbers round-trip exactly through text: the shortest form, and −0 kept', () => {
    // quantize rounds draws in (−0.5, 0.5) to 0 (+0: a value rounded to zero from below is not written −0).
    const res = hhat(['draw', 'normal', '--n', '400', '--perturb', 'quantize:step=1', '--out', 'q.csv', '--json']);
    expect(res.code, res.err).toBe(0);
    expect(hhat(['draw', 'normal', '--n', '400', '--perturb', 'quantize:step=1', '--out', 'q.npy']).code).toBe(0);
    const text = readFileSync(join(dir, 'q.csv'), 'utf8');
    const fromNpy = parseNpy(readFileSync(join(dir, 'q.npy'))).sample.data;
    const fromCsv = Float64Array.from(text.trim().split('\n').slice(1).map(Number));
    expect(Buffer.from(fromCsv.buffer).equals(Buffer.from(fromNpy.buffer))).toBe(true);
    expect(Array.from(fromNpy).some((x) => Object.is(x, 0))).toBe(true);
    expect(Array.from(fromNpy).some((x) => Object.is(x, -0))).toBe(false);
    // A −0 in a sample (a file's own, say) is written so that it reads back as −0: String(−0) is "0".
    const written = [...csvChunks(['x'], [{ replicate: 0, dim: 1, data: Float64Array.of(-0, 0, 0.1) }], false)].join('');
    expect(written).toContain('-0.0');
    const back = Float64Array.from(written.trim().split('\n').slice(1).map(Number));
    expect(Array.from(back, (x) => Object.is(x, -0))).toEqual([true, false, false]);
  });
});

describe('what hhat draw prints', () => {
  it('the scenario, the truth with its source, n, d, seed, replicates and the files', () => {
    const res = hhat(['draw', 'normal:sigma=2', '--n', '10', '--replicates', '3', '--out', 'printed.npy']);
    expect(res.code, res.err).toBe(0);
    const truth = 0.5 * Math.log(2 * Math.PI * Math.E * 4); // h of N(0, 4), Cover & Thomas Table 17.1 (from memory)
    expect(res.out).toContain('scenario    normal:mu=0,sigma=2 (entropy, d = 1)');
    expect(res.out).toContain(`truth       ${truth.toFixed(9)} nats (½ log(2πeσ²)`);
    expect(res.out).toContain(`draws       n = 10, seed ${DEFAULT_SEED}, replicates 0–2 (numbered from 0, as in run files)`);
    expect(res.out).toContain(`wrote       ${join(dir, 'printed.npy')}: (3, 10, 1) float64`);
    const json = JSON.parse(hhat(['draw', 'normal:sigma=2', '--n', '10', '--out', 'printed.csv', '--json']).out) as Record<string, unknown>;
    expect(json).toMatchObject({
      scenario: 'normal:mu=0,sigma=2',
      quantity: 'entropy',
      n: 10,
      dim: 1,
      seed: DEFAULT_SEED,
      replicates: [0],
      format: 'csv',
      unit: 'nats',
    });
    expect(json.truth as number).toBeCloseTo(truth, 14);
    expect(json.files).toEqual([{ path: join(dir, 'printed.csv'), contents: 'sample', replicates: [0], shape: [10, 1] }]);
  });

  it('help says where replicates start and what the default seed is', () => {
    const help = hhat(['draw', '--help']).out;
    expect(help).toContain('Replicates are\nnumbered from 0, as in run files');
    expect(help).toContain(`bench's default seed is ${DEFAULT_SEED}`);
    expect(hhat(['--help']).out).toMatch(/draw +write the exact samples/);
  });
});

describe('usage mistakes: one line, exit 2, nothing written', () => {
  const cases: [string[], string][] = [
    [['nosuch', '--n', '10', '--out', 'e.npy'], 'hhat: unknown scenario "nosuch"; known families: uniform, normal,'],
    [['normal', '--n', '0', '--out', 'e.npy'], 'hhat: --n 0 is not allowed; it must be an integer from 1 to 100000000'],
    [['normal', '--n', '2.5', '--out', 'e.npy'], 'hhat: --n 2.5 is not allowed; it must be an integer from 1 to 100000000'],
    [
      ['normal', '--n', '10', '--out', 'nowhere/e.npy'],
      `hhat: --out ${dir}/nowhere/e.npy: the folder ${join(dir, 'nowhere')} does not exist; create it first or choose another --out`,
    ],
    [['normal', '--n', '10', '--out', 'sub'], `hhat: --out ${dir}/sub is a folder; give a file's path, e.g. --out ${join(dir, 'sub', 'draws.npy')}`],
    [
      ['normal', '--n', '10', '--out', 'e.txt'],
      `hhat: --out ${dir}/e.txt has extension ".txt"; name a .npy, .csv or .json file, or give --format npy|csv|json`,
    ],
    [['normal', '--n', '10', '--out', 'e.npy', '--format', 'parquet'], 'hhat: --format parquet is not allowed; use one of npy, csv, json'],
    [
      ['normal', '--n', '10', '--replicate', '1', '--replicates', '3', '--out', 'e.npy'],
      'hhat: give either --replicate (indices) or --replicates (a count: replicates 0 to R−1), not both',
    ],
    [
      ['normal', '--n', '10', '--replicate', '5-2', '--out', 'e.npy'],
      'hhat: --replicate 5-2 is not allowed; a range runs from the smaller index to the larger (e.g. 0-9)',
    ],
    [['normal', '--n', '10', '--replicate', '-1', '--out', 'e.npy'], 'hhat: --replicate -1 is not allowed; it must be an integer from 0 to 999999'],
    [['normal', '--n', '10', '--replicates', '0', '--out', 'e.npy'], 'hhat: --replicates 0 is not allowed; it must be an integer from 1 to 1000000'],
    [['normal', '--n', '10', '--seed', '-1', '--out', 'e.npy'], 'hhat: --seed -1 is not allowed; it must be an integer ≥ 0'],
    [
      ['mi-gaussian', '--n', '10', '--perturb', 'affine:condition=10', '--out', 'e.npy'],
      'hhat: --perturb affine:condition=10 does not apply to mi-gaussian:dimX=1,dimY=1,rho=0.5,within=0: affine:condition=10,scale=1: an affine map mixes X and Y, and MI is invariant only under maps of each variable',
    ],
    [['normal', '--n', '10', '--perturb', 'rescale:c=0', '--out', 'e.npy'], 'hhat: perturbation rescale:c=0: c=0 is not allowed;'],
  ];
  beforeAll(() => mkdirSync(join(dir, 'sub'), { recursive: true }));
  for (const [args, message] of cases) {
    it(args.join(' '), async () => {
      // In this process (the same main() bin/hhat.js calls), with --out under the test folder.
      const at = args.indexOf('--out');
      const res = await runCli(['draw', ...args.map((a, i) => (i === at + 1 ? join(dir, a) : a))]);
      expect(res.code).toBe(2);
      expect(res.err.trim().split('\n')).toHaveLength(1);
      expect(res.err.startsWith(message), res.err).toBe(true);
      expect(readdirSync(dir).some((f) => f.startsWith('e.'))).toBe(false);
    });
  }

  it('a missing --n or --out is refused by the option parser', async () => {
    const res = await runCli(['draw', 'normal', '--out', join(dir, 'e.npy')]);
    expect(res.code).toBe(2);
    expect(res.err).toContain("required option '--n <n>' not specified");
  });
});

describe('the stated truth of a perturbed draw', () => {
  // Found by a tester: a quantized TE draw explained its unmoved truth by the entropy of a discretised variable.
  it('quantize keeps the continuous target, in words for the quantity drawn', async () => {
    const te = await runCli(['draw', 'te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0', '--n', '50', '--perturb', 'quantize:step=0.1', '--out', join(dir, 'q-te.csv')]);
    expect(te.out).toContain(
      "the target stays the continuous truth, which the rounded values are a recording of (the rounded variables' own information is another value)",
    );
    expect(te.out).not.toContain('H ≈ h');
    const entropy = await runCli(['draw', 'normal', '--n', '50', '--perturb', 'quantize:step=0.1', '--out', join(dir, 'q-normal.csv')]);
    expect(entropy.out).toContain('the rounded variable itself has H ≈ h − Σ log δ_j');
  });
});

describe('files next to the output', () => {
  // Found by a tester: an interrupted draw left its 74 MB temporary; --split beside /dev/null made /dev/null-0.
  it('a temporary an interrupted draw left is removed by the next draw to that file; one being written now is spared', async () => {
    const out = join(dir, 'again.csv');
    const stale = `${out}.0123456789abcdef.tmp`;
    const live = `${out}.fedcba9876543210.tmp`;
    writeFileSync(stale, 'half a file');
    writeFileSync(live, 'being written');
    const minutesAgo = new Date(Date.now() - 5 * 60_000);
    utimesSync(stale, minutesAgo, minutesAgo);
    expect((await runCli(['draw', 'normal', '--n', '5', '--out', out])).code).toBe(0);
    expect(existsSync(stale)).toBe(false);
    expect(existsSync(live)).toBe(true);
    expect(readSample(out).sample.n).toBe(5);
  });

  it.runIf(existsSync('/dev/null'))('refuses a device as --out when the draw writes files named after it', async () => {
    for (const args of [
      ['normal', '--replicates', '2', '--split', '--format', 'npy'],
      ['kl-gaussian:dim=1,shift=0.5', '--format', 'csv'],
    ]) {
      const res = await runCli(['draw', ...args, '--n', '5', '--out', '/dev/null']);
      expect(res.code, args.join(' ')).toBe(2);
      expect(res.err).toMatch(
        /^hhat: --out \/dev\/null is a device or pipe, and this draw writes files named after it \(\/dev\/null-[0q]\); give a file's name\n$/,
      );
    }
  });
});

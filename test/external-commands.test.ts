/**
 * Estimator commands (src/harness/external/): declarations, the protocol's faults as failures with their reasons
 * (the rest of the run intact), no process or temporary file left behind, and the consent and fingerprint rules.
 */
import { spawn, spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { ensureBuilt } from './helpers/built.js';
import { commandDigest, normalizeCommand, parseCommandOption, programProblem, splitCommandLine } from '../src/harness/external/declaration.js';
import { codeDifference, type PlanCode } from '../src/harness/plan.js';
import type { RunFile } from '../src/analysis/results.js';

const root = join(__dirname, '..');
const bin = join(root, 'bin', 'hhat.js');
const faulty = join(root, 'test', 'fixtures', 'faulty_command.py');
const dir = mkdtempSync(join(tmpdir(), 'hhat-commands-test-'));
// A program that is there and executable, so it passes the check before a run, but cannot be started: its
// interpreter is missing (spawn reports ENOENT). It stands for every failure to start that only starting shows.
const noInterpreter = join(dir, 'no-interpreter.sh');
writeFileSync(noInterpreter, '#!/no/such/interpreter-for-hhat\n', { mode: 0o755 });

function hhat(args: string[], env: Record<string, string> = {}): { code: number; out: string; err: string } {
  const result = spawnSync(process.execPath, [bin, ...args], { cwd: dir, encoding: 'utf8', env: { ...process.env, ...env }, timeout: 120_000 });
  return { code: result.status ?? -1, out: result.stdout, err: result.stderr };
}

beforeAll(() => ensureBuilt(['src/harness/external/client.ts', 'src/harness/external/broker.ts', 'src/commands/bench.ts', 'src/commands/estimate.ts']));

describe('declarations', () => {
  it('splits a command line as a shell would for words, quotes and backslashes (no shell runs it)', () => {
    expect(splitCommandLine(`python3 my_kl.py --k 3`, 'x')).toEqual(['python3', 'my_kl.py', '--k', '3']);
    expect(splitCommandLine(`python3 "my estimators/kl.py" 'a b' c\\ d ""`, 'x')).toEqual(['python3', 'my estimators/kl.py', 'a b', 'c d', '']);
    expect(splitCommandLine(`Rscript -e "cat(\\"hi\\")"`, 'x')).toEqual(['Rscript', '-e', 'cat("hi")']);
    expect(() => splitCommandLine(`python3 'oops`, '--estimator-command x')).toThrow(
      `--estimator-command x: the single quote opened in "python3 'oops" is never closed`,
    );
  });

  it('reads ID=PROGRAM ARG... and refuses anything else with an example', () => {
    expect(parseCommandOption('my-kl=python3 my_kl.py')).toEqual({ id: 'my-kl', command: 'python3 my_kl.py' });
    // Found by a tester: the plan schema allowed ids such as "Py.1" that every estimator id refuses.
    expect(() => parseCommandOption('Py.1=python3 my_kl.py')).toThrow(
      `--estimator-command "Py.1=python3 my_kl.py": id "Py.1" is not allowed; an id is lowercase letters and digits in hyphenated words, e.g. "my-kl"`,
    );
    expect(() => normalizeCommand({ id: 'my_kl', command: 'python3 x.py' }, 'entropy', dir, 'plan')).toThrow('estimator command id "my_kl" is not allowed');
    expect(() => parseCommandOption('python3 my_kl.py')).toThrow(
      `--estimator-command "python3 my_kl.py" is not ID=PROGRAM [ARG...]; e.g. --estimator-command 'my-kl=python3 my_kl.py'`,
    );
  });

  it('normalises settings, dims and the working folder, and refuses what cannot work', () => {
    const d = normalizeCommand(
      { id: 'kl', command: ['python3', 'x.py'], settings: { k: 3, h: 0.5, rule: 'auto', m: { default: 2, min: 1, max: 9 } }, dims: [1, 4] },
      'entropy',
      dir,
      'plan',
    );
    expect(d.settings.map((s) => [s.name, s.kind, s.default])).toEqual([
      ['k', 'integer', 3],
      ['h', 'number', 0.5],
      ['rule', 'choice', 'auto'],
      ['m', 'integer', 2],
    ]);
    expect(d).toMatchObject({ cwd: dir, quantity: 'entropy', dims: [1, 4], family: 'external' });
    expect(() => normalizeCommand({ id: 'kl', command: 'python3 x.py', dims: [3, 2] }, 'entropy', dir, 'plan')).toThrow(
      'plan: estimator command "kl": dims [3, 2] is not allowed; give [min, max] with 1 ≤ min ≤ max, or [min, null] for any dimension above min',
    );
    expect(() => normalizeCommand({ id: 'kl', command: 'python3 x.py', cwd: 'nowhere' }, 'entropy', dir, 'plan')).toThrow(
      `plan: estimator command "kl": its working folder ${join(dir, 'nowhere')} does not exist`,
    );
  });

  it('refuses, before anything runs, a program that is not there or not executable (it would fail every estimate)', () => {
    const where = 'plan: estimator command "kl"';
    expect(() => normalizeCommand({ id: 'kl', command: 'no-such-program-for-hhat x.py' }, 'entropy', dir, 'plan')).toThrow(
      `${where}: its program no-such-program-for-hhat is not found on PATH; give its path, or install it`,
    );
    expect(() => normalizeCommand({ id: 'kl', command: './kl.sh' }, 'entropy', dir, 'plan')).toThrow(
      `${where}: its program ./kl.sh (${join(dir, 'kl.sh')}) does not exist`,
    );
    writeFileSync(join(dir, 'plain.sh'), '#!/bin/sh\n', { mode: 0o644 });
    expect(() => normalizeCommand({ id: 'kl', command: './plain.sh' }, 'entropy', dir, 'plan')).toThrow(
      `${where}: its program ${join(dir, 'plain.sh')} is not executable (chmod +x ${join(dir, 'plain.sh')})`,
    );
    // A bare name is looked up on PATH as spawn does, relative entries from the working folder.
    expect(programProblem('plain.sh', dir, `/nowhere:.`)).toBe(
      `its program plain.sh is found on PATH only as ${join(dir, 'plain.sh')}, which is not executable`,
    );
    expect(programProblem('no-interpreter.sh', dir, `/nowhere:.`)).toBeNull();
    expect(programProblem('sh', dir)).toBeNull();
    expect(programProblem('sh', dir, '/nowhere')).toBe('its program sh is not found on PATH; give its path, or install it');
    expect(programProblem(noInterpreter, '/')).toBeNull();
    // A folder is not a program.
    expect(programProblem('./', dir)).toBe(`its program ./ (${dir}) is not a file`);
  });

  it('digests the files a command names: an edited script is different code, and says so', () => {
    const folder = join(dir, 'digest');
    mkdirSync(folder);
    copyFileSync(faulty, join(folder, 'kl.py'));
    const declaration = normalizeCommand({ id: 'kl', command: 'python3 kl.py good' }, 'entropy', folder, 'plan');
    const before = commandDigest(declaration);
    expect(commandDigest(declaration)).toBe(before);
    writeFileSync(join(folder, 'kl.py'), `${readFileSync(join(folder, 'kl.py'), 'utf8')}\n# edited\n`);
    const after = commandDigest(declaration);
    expect(after).not.toBe(before);
    const hhatCode = { version: '1', build: 'b', dependencies: [] };
    const then: PlanCode = { hhat: hhatCode, modules: [], commands: [{ id: 'kl', digest: before }] };
    const now: PlanCode = { hhat: hhatCode, modules: [], commands: [{ id: 'kl', digest: after }] };
    expect(codeDifference(then, now)).toBe('estimator command kl (its command line, folder, settings or a file it names) changed since');
    expect(codeDifference(then, { ...now, commands: [] })).toBe('it used estimator command kl, which this run does not');
  });
});

describe('faults: each a failure with its reason, the rest of the run intact', () => {
  const modes = ['good', 'garbage', 'wrong', 'sleep', 'exit', 'refuse', 'nan'] as const;
  // A private temporary folder for the run, so the test can see that hhat leaves nothing in it.
  const scratch = join(dir, 'tmp');
  let run: RunFile;
  let result: ReturnType<typeof hhat>;
  const marker = `hhat-fault-test-${process.pid}`;

  beforeAll(() => {
    mkdirSync(scratch);
    const plan = {
      quantity: 'entropy',
      scenarios: ['normal'],
      estimators: ['kozachenko-leonenko'],
      sampleSizes: [50],
      replicates: 6,
      limits: { estimateSeconds: 1, estimateSecondsPerPoint: 0 },
      commands: [...modes.map((mode) => ({ id: mode, command: ['python3', faulty, mode, marker] })), { id: 'missing', command: [noInterpreter, 'x.py'] }],
    };
    writeFileSync(join(dir, 'faults.json'), JSON.stringify(plan));
    result = hhat(['bench', '--plan', 'faults.json', '--allow-plan-modules', '--workers', '2', '--out', 'faults-run.json'], { TMPDIR: scratch });
    run = JSON.parse(readFileSync(join(dir, 'faults-run.json'), 'utf8')) as RunFile;
  }, 120_000);

  const cell = (id: string) => run.cells.find((c) => c.estimatorId === id)!;
  const restart = 'it was stopped and restarts for the next estimate';

  it('finishes the run (exit 0) with every estimator ranked', () => {
    expect(result.code).toBe(0);
    expect(run.cells.map((c) => c.estimatorId).sort()).toEqual(['kozachenko-leonenko', 'missing', ...modes].sort());
  });

  it('leaves the built-in and the well-behaved command untouched', () => {
    expect(cell('kozachenko-leonenko').failures).toEqual([]);
    expect(cell('good').failures).toEqual([]);
    expect(cell('good').estimates.every((v) => Number.isFinite(v))).toBe(true);
  });

  it('fails only the broken request, with its reason, and restarts the command for the next (replicates 1, 3, 5 are request 2 of a process)', () => {
    const reasons: Record<string, string> = {
      garbage: `command: garbage answered request 2 with a line that is not a JSON object: "estimating... done" (print diagnostics to stderr, not stdout); ${restart}`,
      wrong: `command: wrong answered request 9 while request 2 was asked; ${restart}`,
      sleep: `command: sleep timed out after 1 s (the limit at every n: --time-limit, or plan limits.estimateSeconds) on request 2; ${restart}`,
      exit: `command: exit exited with code 3 before answering request 2 (stderr: faulty_command: giving up on request 2); ${restart}`,
      nan: `command: nan answered request 2 with value null, not a finite number; ${restart}`,
    };
    const good = cell('good').estimates;
    for (const [id, reason] of Object.entries(reasons)) {
      const c = cell(id);
      expect(c.failures, id).toEqual([1, 3, 5].map((replicate) => ({ replicate, message: reason })));
      // The other replicates answered as the good command did (the same draws, the same rule).
      expect(
        [0, 2, 4].map((r) => c.estimates[r]),
        id,
      ).toEqual([0, 2, 4].map((r) => good[r]));
    }
  });

  it('keeps a command that reports its own error alive (only that estimate fails)', () => {
    expect(cell('refuse').failures).toEqual([{ replicate: 1, message: 'command: refuse reported: refusing request 2 on purpose' }]);
    expect(cell('refuse').estimates.filter((v) => v === null)).toHaveLength(1);
  });

  it('fails every estimate of a command that cannot be started, saying why and what it tried', () => {
    const c = cell('missing');
    expect(c.failures).toHaveLength(6);
    expect(c.failures[0].message).toBe(
      `command: missing could not be started: spawn ${noInterpreter} ENOENT (no such program, or its working folder is gone); the command is \`${noInterpreter} x.py\` in ${dir}; hhat starts it again for the next estimate`,
    );
  });

  it('leaves no command process and no temporary file behind', () => {
    const left = spawnSync('pgrep', ['-f', marker], { encoding: 'utf8' }).stdout.trim();
    expect(left).toBe('');
    expect(readdirSync(scratch)).toEqual([]);
  });
});

describe('a run stopped by a signal stops its commands, and what they started', () => {
  it('SIGTERM to hhat alone, while a command behind a launcher sleeps in an estimate: no process is left', async () => {
    const marker = `hhat-signal-test-${process.pid}`;
    // A launcher that runs the program as its child (as a version manager's shim does), not with exec.
    const launcher = join(dir, 'launcher.sh');
    writeFileSync(launcher, `#!/bin/sh\npython3 "${faulty}" sleep ${marker}\n`, { mode: 0o755 });
    const alive = () => spawnSync('pgrep', ['-f', `python3 ${faulty} sleep ${marker}`], { encoding: 'utf8' }).stdout.trim();
    const args = [bin, 'bench', '--scenario', 'normal', '--estimator-command', `sleepy=${launcher}`, '--n', '50', '--replicates', '3'];
    const child = spawn(process.execPath, [...args, '--time-limit', '600', '--out', 'signal-run.json'], { cwd: dir, stdio: 'ignore' });
    const exited = new Promise<number | null>((done) => child.on('exit', (code) => done(code)));
    // The second request sleeps: wait until the program is in it.
    for (let i = 0; i < 300 && !alive(); i++) await new Promise((wait) => setTimeout(wait, 100));
    expect(alive()).not.toBe('');
    await new Promise((wait) => setTimeout(wait, 500));
    child.kill('SIGTERM');
    expect(await exited).toBe(143);
    for (let i = 0; i < 20 && alive(); i++) await new Promise((wait) => setTimeout(wait, 100));
    expect(alive()).toBe('');
  }, 60_000);
});

describe('the Python example (examples/knn_entropy.py) in a bench, against an independent computation on the draws hhat draw exports', () => {
  const scenarios = ['normal', 'gaussian:dim=3,rho=0.5'];
  const sizes = [100, 400];
  let run: RunFile;

  beforeAll(() => {
    const example = `soil-kl=python3 ${join(root, 'examples', 'knn_entropy.py')}`;
    const args = ['bench', '--estimator-command', example, '--estimator', 'kozachenko-leonenko', '--estimator', 'vasicek', '--estimator', 'gaussian'];
    for (const s of scenarios) args.push('--scenario', s);
    const r = hhat([...args, '--n', sizes.join(','), '--replicates', '10', '--out', 'example-run.json', '--quiet']);
    expect(r.code, r.err).toBe(0);
    run = JSON.parse(readFileSync(join(dir, 'example-run.json'), 'utf8')) as RunFile;
  }, 120_000);

  it('gives, replicate by replicate, the estimates SciPy computes from the exported draws (to 1e-12)', () => {
    let compared = 0;
    for (const cell of run.cells.filter((c) => c.estimatorId === 'soil-kl')) {
      // The same scenario, n, replicates (0..9) and the run's seed: the draws the command received.
      const file = join(dir, `draws-${compared}.npy`);
      const drawn = hhat(['draw', cell.scenario, '--n', String(cell.n), '--replicates', '10', '--seed', String(run.plan.seed), '--out', file]);
      expect(drawn.code, drawn.err).toBe(0);
      // The independent computation: all-pairs distances (scipy.spatial.distance.cdist), digamma and gammaln from SciPy.
      const reference = spawnSync('python3', [join(root, 'test', 'fixtures', 'kl_reference.py'), file, '3'], { encoding: 'utf8' });
      expect(reference.status, reference.stderr).toBe(0);
      const expected = JSON.parse(reference.stdout) as number[];
      expect(cell.estimates).toHaveLength(10);
      cell.estimates.forEach((value, r) => expect(Math.abs((value as number) - expected[r]), `${cell.scenario} n=${cell.n} r=${r}`).toBeLessThan(1e-12));
      compared++;
    }
    expect(compared).toBe(scenarios.length * sizes.length);
  });

  it('is ranked beside the built-ins in every cell, and in the overall table', () => {
    expect(run.rankings).toHaveLength(scenarios.length * sizes.length);
    for (const ranking of run.rankings) {
      const ids = ranking.entries.map((e) => e.estimator.split(':')[0]).sort();
      expect(ids).toEqual(['gaussian', 'kozachenko-leonenko', 'soil-kl', 'vasicek'].filter((id) => id !== 'vasicek' || ranking.scenario.startsWith('normal')));
      expect(ranking.entries.find((e) => e.estimator === 'soil-kl')!.status).toBe('ranked');
    }
    expect(run.overall.map((o) => o.estimator)).toContain('soil-kl');
  });
});

describe('on the command line', () => {
  beforeAll(() => {
    writeFileSync(
      join(dir, 'plan-with-command.json'),
      JSON.stringify({ scenarios: ['normal'], estimators: ['histogram'], commands: [{ id: 'x', command: 'python3 x.py' }] }),
    );
    writeFileSync(join(dir, 'points.csv'), 'x,y\n1,2\n3,4.5\n2,1\n5,5\n0.3,2\n4,1\n');
  });

  // Found by a tester: this said "module estimator".
  it("names a plan's command as an estimator command when its declaration is refused", () => {
    const plan = {
      scenarios: ['normal'],
      estimators: ['x'],
      sampleSizes: [50],
      replicates: 2,
      commands: [{ id: 'x', command: ['python3', 'x.py'], settings: { k: { default: 3, min: 5 } } }],
    };
    writeFileSync(join(dir, 'plan-bad-setting.json'), JSON.stringify(plan));
    const r = hhat(['bench', '--plan', 'plan-bad-setting.json', '--allow-plan-modules', '--out', 'never-bad.json']);
    expect(r.code).toBe(2);
    expect(r.err).toBe('hhat: estimator command ("x"): settings[0] ("k"): default 3 is not allowed; k must be an integer ≥ 5\n');
  });

  it("starts a plan file's commands only with consent", () => {
    const r = hhat(['bench', '--plan', 'plan-with-command.json']);
    expect(r.code).toBe(2);
    expect(r.err.trim()).toBe(
      'hhat: plan-with-command.json names estimator commands (x), which are programs that run with your rights; read them, then add --allow-plan-modules to start them (or pass them with --estimator-command)',
    );
  });

  it("estimate: a command joins the estimators; one that fails is its row's failure and exit 1", () => {
    const ok = hhat(['estimate', 'points.csv', '--estimator', 'kozachenko-leonenko', '--estimator-command', `first=python3 ${faulty} good`, '--json']);
    expect(ok.code).toBe(0);
    const records = (JSON.parse(ok.out) as { estimates: { estimator: string; value: number }[] }).estimates;
    // The fixture answers the first value plus 1: 1 + 1.
    expect(records.map((r) => [r.estimator, r.estimator === 'first' ? r.value : 'any'])).toEqual([
      ['kozachenko-leonenko', 'any'],
      ['first', 2],
    ]);
    const bad = hhat(['estimate', 'points.csv', '--estimator-command', `gone=${noInterpreter}`]);
    expect(bad.code).toBe(1);
    expect(bad.out).toMatch(/gone\s+│.*failed/);
    expect(bad.err).toContain(`gone could not be started: spawn ${noInterpreter} ENOENT`);
    // The default estimators beside it ran: no line may say that none did.
    expect(bad.err).not.toContain('none of the');
  });

  // Found by a tester: under --quiet a command that could not be started passed unseen (exit 0, stderr empty).
  it('bench --quiet still says, in one line on stderr, that estimates failed', () => {
    const r = hhat([
      'bench',
      '--scenario',
      'normal',
      '--estimator',
      'gaussian',
      '--n',
      '50',
      '--replicates',
      '3',
      '--out',
      'quiet-fail.json',
      '--quiet',
      '--estimator-command',
      `gone=${noInterpreter}`,
    ]);
    expect(r.code).toBe(0);
    expect(r.out).toBe(`${join(dir, 'quiet-fail.json')}\n`);
    expect(r.err).toBe('hhat: 3 estimates failed in the benchmark cells (gone 3); the run file lists each with its reason (cells[].failures)\n');
  });

  it('a program that is not there is a usage mistake of bench, estimate, advise and check (exit 2, one line)', () => {
    const line = `--estimator-command gone=no-such-program-for-hhat: estimator command "gone": its program no-such-program-for-hhat is not found on PATH; give its path, or install it`;
    for (const args of [
      ['bench', '--scenario', 'normal', '--n', '50', '--out', 'never.json'],
      ['estimate', 'points.csv'],
      ['advise', 'points.csv'],
      ['check'],
    ]) {
      const r = hhat([...args, '--estimator-command', 'gone=no-such-program-for-hhat']);
      expect(r.err, args[0]).toBe(`hhat: ${line}\n`);
      expect(r.code, args[0]).toBe(2);
    }
    expect(existsSync(join(dir, 'never.json'))).toBe(false);
  });

  // Found by a tester: a script that crashed on NaN or on too few points passed rejects-non-finite and
  // rejects-too-few, as if its crash were a refusal.
  it('check: only a command\'s own {"error": ...} reply counts as refusing bad data, not a crash', () => {
    const script = join(dir, 'strict.py');
    writeFileSync(
      script,
      [
        'import json, math, struct, sys',
        'crash = sys.argv[1] == "crash"',
        'for line in sys.stdin:',
        '    m = json.loads(line)',
        '    if "hhat" in m:',
        '        print(json.dumps({"ready": True}), flush=True)',
        '        continue',
        '    raw = open(m["npy"], "rb").read()',
        '    start = 10 + struct.unpack("<H", raw[8:10])[0]',
        '    values = struct.unpack("<%dd" % (m["n"] * m["dim"]), raw[start:start + 8 * m["n"] * m["dim"]])',
        '    if m["n"] < 2 or not all(math.isfinite(v) for v in values):',
        '        if crash:',
        '            sys.exit(1)',
        '        print(json.dumps({"request": m["request"], "error": "needs 2 or more finite values"}), flush=True)',
        '        continue',
        '    print(json.dumps({"request": m["request"], "value": sum(values) / len(values)}), flush=True)',
        '',
      ].join('\n'),
    );
    const status = (mode: string) => {
      const r = hhat(['check', '--estimator-command', `strict=python3 ${script} ${mode}`, '--json']);
      const report = (JSON.parse(r.out) as { estimators: { checks: { check: string; status: string; evidence: string }[] }[] }).estimators[0];
      return Object.fromEntries(report.checks.filter((c) => c.check.startsWith('rejects-')).map((c) => [c.check, [c.status, c.evidence]]));
    };
    const polite = status('polite');
    expect(polite['rejects-non-finite'][0]).toBe('pass');
    expect(polite['rejects-too-few'][0]).toBe('pass');
    const crashing = status('crash');
    for (const check of ['rejects-non-finite', 'rejects-too-few']) {
      expect(crashing[check][0], check).toBe('fail');
      expect(crashing[check][1], check).toContain('the command gave no answer (strict exited with code 1 before answering request');
    }
  });

  it('check: a command passes the conformance suite like any estimator', () => {
    const r = hhat(['check', '--estimator-command', `kl=python3 ${join(root, 'examples', 'knn_entropy.py')}`]);
    expect(r.err).toBe('');
    expect(r.code).toBe(0);
    expect(r.out.split('\n')[0]).toMatch(/^kl \(entropy, samples from normal:mu=0,sigma=1\): passes: 8 pass, 3 not applicable/);
  });

  it('refuses a command declared twice', () => {
    const r = hhat(['bench', '--estimator-command', 'a=python3 x.py', '--estimator-command', 'a=python3 y.py', '--scenario', 'normal']);
    expect(r.code).toBe(2);
    expect(r.err.trim()).toBe('hhat: estimator command "a" is declared twice; each id may be declared once');
  });

  it('leaves no temporary folder after estimate or check', () => {
    const scratch = join(dir, 'tmp-estimate');
    mkdirSync(scratch);
    hhat(['estimate', 'points.csv', '--estimator-command', `first=python3 ${faulty} good`], { TMPDIR: scratch });
    expect(existsSync(scratch) && readdirSync(scratch)).toEqual([]);
  });
});

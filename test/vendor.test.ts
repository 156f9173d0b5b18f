/**
 * The single-file copies a built hhat loads (dist/vendor/, src/core/vendor.ts) against the packages as installed
 * (the reference): every special function and distribution bit for bit on a spread of arguments, every sampler's
 * first draws from the same seeded stream, and seedrandom's stream. `npm test` builds dist/ first.
 */
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { vendorFile } from '../src/core/vendor.js';

const root = join(import.meta.dirname, '..');
const require = createRequire(join(root, 'package.json'));
const manifest = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { dependencies: Record<string, string> };
const vendored = Object.keys(manifest.dependencies).filter((name) => vendorFile(name) !== null);

function copyOf(name: string): unknown {
  return (require(join(root, 'dist/vendor', vendorFile(name)!)) as Record<string, unknown>)[name];
}

/** A small seeded stream in [0, 1), the same for both sides. */
function stream(seed: number): () => number {
  let state = seed;
  return () => {
    state = (state * 48271) % 2147483647;
    return state / 2147483647;
  };
}

const ARGUMENTS = [-7.25, -1, -0.5, -1e-9, 0, 1e-300, 1e-9, 0.1, 0.5, 1, 1.5, 2, 3.7, 10, 31.4, 170.5, 1e5];

describe('dist/vendor copies (src/core/vendor.ts)', () => {
  it('exist for every vendored dependency', () => {
    expect(vendored.length).toBeGreaterThan(30);
    for (const name of vendored) expect(existsSync(join(root, 'dist/vendor', vendorFile(name)!)), name).toBe(true);
  });

  it('are what the code loads: no source file imports a vendored package by name (it would bypass the copy)', () => {
    const files = ['src', 'estimators', 'scenarios'].flatMap((folder) =>
      (readdirSync(join(root, folder), { recursive: true }) as string[]).filter((f) => f.endsWith('.ts')).map((f) => join(root, folder, f)),
    );
    expect(files.length).toBeGreaterThan(100);
    const offenders = files.filter((file) => /^import (?!type )[^;]*from '(@stdlib\/[^']+|seedrandom)'/m.test(readFileSync(file, 'utf8')));
    expect(offenders).toEqual([]);
  });

  it('compute what the installed special functions and distributions compute, bit for bit', () => {
    let compared = 0;
    let finite = 0;
    for (const name of vendored.filter((n) => !n.startsWith('@stdlib/random-') && n !== 'seedrandom')) {
      const installed = require(name) as (...args: number[]) => number;
      const copy = copyOf(name) as (...args: number[]) => number;
      expect(typeof copy, name).toBe('function');
      for (const x of ARGUMENTS) {
        for (const y of [0.5, 2, 7]) {
          for (const z of [0.3, 4]) {
            const expected = installed(x, y, z);
            expect(Object.is(copy(x, y, z), expected), `${name}(${x}, ${y}, ${z})`).toBe(true);
            compared++;
            if (Number.isFinite(expected)) finite++;
          }
        }
      }
    }
    expect(compared).toBeGreaterThan(1000);
    expect(finite).toBeGreaterThan(compared / 2);
  });

  it("draw what the installed samplers draw from the same stream, and seedrandom's stream is the same", () => {
    type Sampler = { factory: (...args: unknown[]) => () => number };
    // Parameters each sampler accepts (support and shape), from the packages' own documentation.
    const parameters: Record<string, number[]> = {
      arcsine: [0, 2],
      beta: [2, 3],
      cauchy: [0, 1],
      chi: [3],
      chisquare: [3],
      erlang: [2, 1.5],
      exponential: [2],
      frechet: [2, 1, 0],
      gamma: [2, 1.5],
      gumbel: [0, 1],
      invgamma: [3, 2],
      kumaraswamy: [2, 3],
      laplace: [0, 1],
      levy: [0, 1],
      logistic: [0, 1],
      lognormal: [0, 1],
      normal: [0, 1],
      'pareto-type1': [2, 1],
      rayleigh: [1],
      t: [4],
      triangular: [0, 2, 1],
      uniform: [0, 1],
      weibull: [2, 1],
    };
    const samplers = vendored.filter((n) => n.startsWith('@stdlib/random-base-'));
    for (const name of samplers) {
      const kind = name.slice('@stdlib/random-base-'.length);
      expect(parameters[kind], `parameters for ${name}`).toBeDefined();
      const a = (require(name) as Sampler).factory(...parameters[kind], { prng: stream(7) });
      const b = (copyOf(name) as Sampler).factory(...parameters[kind], { prng: stream(7) });
      for (let i = 0; i < 200; i++) {
        const expected = a();
        expect(Number.isFinite(expected), `${name} draw ${i}`).toBe(true);
        expect(Object.is(b(), expected), `${name} draw ${i}`).toBe(true);
      }
    }
    const installed = require('seedrandom') as (seed: string) => () => number;
    const copy = copyOf('seedrandom') as (seed: string) => () => number;
    const [x, y] = [installed('hhat vendor check'), copy('hhat vendor check')];
    for (let i = 0; i < 200; i++) expect(y()).toBe(x());
  });
});

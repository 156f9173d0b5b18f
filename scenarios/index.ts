/**
 * The scenario registry: the only way the harness and the CLI reach scenarios.
 *
 * A scenario is named by a spec string, the same string as its id:
 *   family[:key=value,...]            e.g. gamma:shape=2,scale=1 (omitted keys take their defaults)
 *   product[SPEC;SPEC;...]            independent coordinates, e.g. product[normal;exponential:rate=2]
 *   transformed[MAP;SPEC]             a monotone map of a 1-D base, e.g. transformed[sinh;normal]
 *   gaussian-covariance[ROW;ROW;...]  any covariance, e.g. gaussian-covariance[1,0.5;0.5,2]
 *   autocorrelated[phi=φ;SPEC]        rows as a stationary AR(1) series with SPEC's law, e.g. autocorrelated[phi=0.9;gamma]
 *   recorded[step=Δ;SPEC]             SPEC rounded to a lattice of step Δ when recorded, e.g. recorded[step=0.01;normal]
 *   cmi-gaussian-covariance[DX,DY;ROW;...]  conditional MI of a Gaussian (X, Y, Z) with any covariance
 */
import type { Scenario, ScenarioFamily } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { didYouMean } from '../src/core/suggest.js';
import { checkSpecText, parseSpec, validateParams } from '../src/core/spec.js';
import { gaussianMixtureFamily, monotoneMaps, transformedExamples, transformedScenario } from './mixtures-and-transforms.js';
import { gaussianCovarianceScenario, multivariateFamilies, parseCovarianceArgument, productScenario } from './multivariate.js';
import { univariateFamilies } from './univariate.js';
import { LOOKALIKE_FAMILY, LOOKALIKE_SUMMARY, LOOKALIKE_USAGE, lookalikeScenario, parseLookalikeArgument } from './lookalike.js';
import { dependenceFamilies } from './dependence.js';
import { divergenceFamilies } from './divergence-pairs.js';
import { parseRecordedArgument, RECORDED_FAMILY, RECORDED_SUMMARY, RECORDED_USAGE, recordedScenario } from './recorded.js';
import { AUTOCORRELATED_FAMILY, AUTOCORRELATED_SUMMARY, AUTOCORRELATED_USAGE, autocorrelatedScenario, parseAutocorrelatedArgument } from './autocorrelated.js';
import {
  CMI_COVARIANCE_FAMILY,
  CMI_COVARIANCE_USAGE,
  conditionalCovarianceScenario,
  conditionalFamilies,
  parseConditionalCovarianceArgument,
} from './conditional.js';
import { transferFamilies } from './transfer-entropy.js';
import { mixedFamilies } from './mixed.js';

const families = new Map<string, ScenarioFamily>();
for (const f of [
  ...univariateFamilies,
  ...multivariateFamilies,
  gaussianMixtureFamily,
  ...dependenceFamilies,
  ...mixedFamilies,
  ...conditionalFamilies,
  ...transferFamilies,
  ...divergenceFamilies,
])
  families.set(f.id, f);

/** Families written with a bracketed argument rather than key=value parameters. */
export const bracketFamilies = [
  { id: 'product', usage: 'product[SPEC;SPEC;...]', summary: 'independent product of scenarios; entropies add' },
  {
    id: 'transformed',
    usage: `transformed[MAP;SPEC], MAP one of ${monotoneMaps.map((m) => m.id).join(', ')}`,
    summary: 'monotone map of a 1-D scenario; numeric truth h + E[log|g′|]',
  },
  { id: 'gaussian-covariance', usage: 'gaussian-covariance[ROW;ROW;...], entries comma-separated', summary: 'Gaussian with any covariance' },
  { id: LOOKALIKE_FAMILY, usage: LOOKALIKE_USAGE, summary: LOOKALIKE_SUMMARY },
  { id: AUTOCORRELATED_FAMILY, usage: AUTOCORRELATED_USAGE, summary: AUTOCORRELATED_SUMMARY },
  { id: RECORDED_FAMILY, usage: RECORDED_USAGE, summary: RECORDED_SUMMARY },
  { id: CMI_COVARIANCE_FAMILY, usage: CMI_COVARIANCE_USAGE, summary: 'conditional MI I(X;Y|Z) of a Gaussian with any covariance' },
] as const;

export function listFamilies(): ScenarioFamily[] {
  return [...families.values()];
}

export function getFamily(id: string): ScenarioFamily {
  const f = families.get(id);
  if (!f) throw unknownScenario(id);
  return f;
}

function unknownScenario(id: string): UsageError {
  const names = [...families.keys(), ...bracketFamilies.map((b) => b.id)];
  return new UsageError(`unknown scenario "${id}"${didYouMean(id, names)}; known families: ${names.join(', ')} (see \`hhat scenarios\`)`);
}

/** Splits on ';' outside nested brackets. */
function splitTopLevel(text: string): string[] {
  const parts: string[] = [];
  let depth = 0;
  let start = 0;
  for (let i = 0; i < text.length; i++) {
    const ch = text[i];
    if (ch === '[') depth++;
    else if (ch === ']') depth--;
    else if (ch === ';' && depth === 0) {
      parts.push(text.slice(start, i));
      start = i + 1;
    }
  }
  parts.push(text.slice(start));
  return parts.map((p) => p.trim());
}

const cache = new Map<string, Scenario>();

/** Builds the scenario a spec names. Results are cached: numeric truths are computed once per process. */
export function parseScenario(spec: string): Scenario {
  checkSpecText(spec, 'scenario');
  const key = spec.trim();
  const hit = cache.get(key);
  if (hit) return hit;
  const scenario = buildScenario(key);
  cache.set(key, scenario);
  cache.set(scenario.id, scenario);
  return scenario;
}

function buildScenario(text: string): Scenario {
  const bracket = /^([a-z0-9-]+)\[(.*)\]$/s.exec(text);
  if (bracket) {
    const [, name, inner] = bracket;
    const args = splitTopLevel(inner);
    switch (name) {
      case 'product':
        return productScenario(args.map(parseScenario));
      case 'transformed': {
        if (args.length !== 2) throw new UsageError(`transformed[...] takes a map and a base: transformed[MAP;SPEC]; got "${text}"`);
        const mapSpec = parseSpec(args[0], 'map');
        return transformedScenario(mapSpec.id, mapSpec.values, parseScenario(args[1]));
      }
      case 'gaussian-covariance':
        return gaussianCovarianceScenario(parseCovarianceArgument(inner));
      case LOOKALIKE_FAMILY:
        return lookalikeScenario(parseLookalikeArgument(args));
      case AUTOCORRELATED_FAMILY: {
        const { phi, base } = parseAutocorrelatedArgument(args, text);
        return autocorrelatedScenario(phi, parseScenario(base));
      }
      case RECORDED_FAMILY: {
        const { steps, base } = parseRecordedArgument(args, text);
        return recordedScenario(steps, parseScenario(base));
      }
      case CMI_COVARIANCE_FAMILY:
        return conditionalCovarianceScenario(parseConditionalCovarianceArgument(args));
      default:
        throw unknownScenario(name);
    }
  }
  if (text.includes('[') || text.includes(']')) throw new UsageError(`scenario "${text}": brackets are unbalanced or misplaced`);
  const { id, values } = parseSpec(text, 'scenario');
  if (id === gaussianMixtureFamily.id) return gaussianMixtureFamily.parse(values);
  const f = getFamily(id);
  return f.create(validateParams(f.id, f.params, values));
}

/** Every scenario the catalog lists: each family's default, its examples, and composite examples. */
export function catalog(): Scenario[] {
  const specs: string[] = [];
  for (const f of families.values()) {
    const defaults = Object.fromEntries(f.params.map((p) => [p.name, p.default]));
    specs.push(f.create(defaults).id);
    for (const example of f.examples ?? []) specs.push(f.create(example).id);
  }
  specs.push(
    'product[normal;exponential]',
    'product[uniform;cauchy;gamma:shape=3,scale=1]',
    'gaussian-covariance[2,0.9,0;0.9,1,-0.3;0,-0.3,0.5]',
    'cmi-gaussian-covariance[1,1;2,0.9,0.3;0.9,1,-0.3;0.3,-0.3,0.5]',
    ...transformedExamples,
  );
  const seen = new Set<string>();
  const out: Scenario[] = [];
  for (const spec of specs) {
    const s = parseScenario(spec);
    if (!seen.has(s.id)) {
      seen.add(s.id);
      out.push(s);
    }
  }
  return out;
}

/** Whether a scenario's truth is closed form (false: computed numerically with a stated error). */
export function isNumericTruth(s: Scenario): boolean {
  return s.truthSource.startsWith('numeric');
}

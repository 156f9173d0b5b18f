/**
 * Typo suggestions. Edit distances checked against textbook values: kitten → sitting is 3 (Levenshtein's
 * classic example); under optimal string alignment a swap of neighbours costs 1 ("ab" → "ba") and "ca" → "abc"
 * costs 3 (the case where it differs from unrestricted Damerau–Levenshtein, which gives 2).
 */
import { describe, expect, it } from 'vitest';
import { didYouMean, editDistance } from '../src/core/suggest.js';
import { runCli } from './helpers/cli.js';

describe('editDistance', () => {
  it('matches the textbook values', () => {
    expect(editDistance('kitten', 'sitting')).toBe(3);
    expect(editDistance('ab', 'ba')).toBe(1);
    expect(editDistance('ca', 'abc')).toBe(3);
    expect(editDistance('', 'abc')).toBe(3);
    expect(editDistance('same', 'same')).toBe(0);
  });
});

describe('didYouMean', () => {
  it('names the one nearest name when it is within a third of the length, and nothing on a tie, far off or under 3 characters', () => {
    expect(didYouMean('nrmal', ['normal', 'uniform', 'gamma'])).toBe(' (did you mean normal?)');
    expect(didYouMean('bandwith', ['bandwidth', 'scale'])).toBe(' (did you mean bandwidth?)');
    expect(didYouMean('ksg', ['ksg1', 'ksg2'])).toBe('');
    expect(didYouMean('zzzzzz', ['normal', 'uniform'])).toBe('');
    expect(didYouMean('normal', ['normal'])).toBe('');
    expect(didYouMean('q', ['k', 'norm'])).toBe('');
  });

  it('is part of the one-line refusal of an unknown scenario, estimator, setting or unit', async () => {
    for (const [args, hint] of [
      [['scenarios', 'nrmal'], 'unknown scenario "nrmal" (did you mean normal?); known families: '],
      [['estimate', 'examples/oven-probes.csv', '--estimator', 'kernl'], 'unknown estimator "kernl" (did you mean kernel?); known: '],
      [['convert', '1', '--from', 'mmm', '--to', 'm'], 'unknown unit "mmm" (did you mean mm?); known: '],
    ] as const) {
      const { code, err } = await runCli([...args]);
      expect(code).toBe(2);
      expect(err.trim().split('\n')).toHaveLength(1);
      expect(err).toContain(hint);
    }
  });
});

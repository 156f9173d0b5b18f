/**
 * The recording-resolution verdict (src/analysis/resolution.ts) on constructed error curves whose doubling step
 * is known by construction: a power law in the step is a straight line in log–log, so the interpolation must
 * return its exact doubling step; failures and curves that never double must say so.
 */
import { describe, expect, it } from 'vitest';
import { doublingStep, doublingText } from '../src/analysis/resolution.js';

/** RMSE(s) = 2·base·(s/s*)^p doubles the base exactly at s = s*. */
function powerCurve(base: number, doubleAt: number, power: number, steps: number[]) {
  return steps.map((step) => ({ step, rmse: 2 * base * (step / doubleAt) ** power, failures: 0 }));
}

describe('doublingStep', () => {
  it('finds the exact step of a power-law error curve between two grid steps', () => {
    for (const [doubleAt, power] of [
      [0.05, 1.5],
      [0.02, 3],
      [0.2, 0.7],
    ]) {
      const d = doublingStep(0.03, powerCurve(0.03, doubleAt, power, [0.001, 0.01, 0.1, 0.3]));
      expect(d.relation).toBe('at');
      expect(d.step).toBeCloseTo(doubleAt, 12);
    }
  });

  it('says "beyond" when the error stays under twice the base at every step', () => {
    const points = [0.01, 0.1, 0.3].map((step) => ({ step, rmse: 0.05 * (1 + step), failures: 0 }));
    expect(doublingStep(0.05, points)).toEqual({ relation: 'beyond', step: 0.3 });
    expect(doublingText({ relation: 'beyond', step: 0.3 })).toBe('> 0.3 SD');
  });

  it('says "by" the smallest step when the error has already doubled there', () => {
    expect(doublingStep(0.01, powerCurve(0.01, 0.0001, 1, [0.001, 0.01]))).toEqual({ relation: 'by', step: 0.001 });
  });

  it('counts a step where some estimate fails as doubled, without interpolating', () => {
    const points = [
      { step: 0.01, rmse: 0.011, failures: 0 },
      { step: 0.1, rmse: null, failures: 3 },
    ];
    expect(doublingStep(0.01, points)).toEqual({ relation: 'by', step: 0.1 });
    expect(doublingText({ relation: 'by', step: 0.1 })).toBe('≤ 0.1 SD');
  });

  it('sorts the steps it is given', () => {
    const curve = powerCurve(0.03, 0.05, 2, [0.3, 0.01, 0.1]);
    expect(doublingStep(0.03, curve).step).toBeCloseTo(0.05, 12);
  });
});

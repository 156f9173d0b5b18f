import type { Estimator } from '../src/contracts.js';

export const parametricEstimators: Estimator[] = [];

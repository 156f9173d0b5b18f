/**
 * Colours and marks of the report, chosen so that readers with any common colour-vision deficiency can tell
 * the estimators apart: the Okabe–Ito palette (Okabe & Ito, "Color Universal Design", 2008), which stays
 * distinguishable under protanopia, deuteranopia and tritanopia, extended by its usual companion grey.
 * Every estimator also gets its own point shape, so no chart relies on colour alone.
 */

/** Okabe–Ito, reordered so the low-contrast yellow comes last and only shows with nine or more estimators. */
export const ESTIMATOR_COLOURS = [
  '#0072B2', // blue
  '#E69F00', // orange
  '#009E73', // bluish green
  '#D55E00', // vermillion
  '#CC79A7', // reddish purple
  '#56B4E9', // sky blue
  '#000000', // black
  '#999999', // grey
  '#F0E442', // yellow
];

/**
 * Vega symbol shapes, paired with the colours above (a pair repeats only after 90 estimators). Vega's thin
 * shapes (wedge, stroke, arrow) vanish at point size, so the last two are filled outlines in vega's unit
 * square: a five-pointed star and a diagonal cross.
 */
export const ESTIMATOR_SHAPES = [
  'circle',
  'square',
  'triangle-up',
  'diamond',
  'cross',
  'triangle-down',
  'triangle-right',
  'triangle-left',
  'M0,-1L0.24,-0.33L0.95,-0.31L0.38,0.12L0.59,0.81L0,0.4L-0.59,0.81L-0.38,0.12L-0.95,-0.31L-0.24,-0.33Z',
  'M-1,-0.6L-0.6,-1L0,-0.4L0.6,-1L1,-0.6L0.4,0L1,0.6L0.6,1L0,0.4L-0.6,1L-1,0.6L-0.4,0Z',
];

export function estimatorColour(index: number): string {
  return ESTIMATOR_COLOURS[index % ESTIMATOR_COLOURS.length];
}

export function estimatorShape(index: number): string {
  return ESTIMATOR_SHAPES[index % ESTIMATOR_SHAPES.length];
}

/** Verdicts of the robustness grid; each cell also prints its verdict as text, so colour is never the only cue. */
export const VERDICT_COLOURS: Record<string, string> = {
  pass: '#009E73',
  warn: '#E69F00',
  fail: '#D55E00',
  'n/a': '#DDDDDD',
};

/** Sequential scheme for the rank heat map: viridis is perceptually uniform and colour-blind safe. */
export const RANK_SCHEME = 'viridis';

/** Reference lines (true value, efficiency bound): neutral so they never read as an estimator. */
export const REFERENCE_COLOUR = '#444444';

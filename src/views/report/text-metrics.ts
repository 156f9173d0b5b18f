/**
 * Text widths for vega's layout without a canvas. Vega's own fallback guesses 0.8 em per character, about
 * half again too wide for a sans-serif font, which leaves wide empty margins in every SVG and truncates
 * legend labels early. Vega lets a caller replace `textMetrics.width` (its comment names vl-convert as one
 * that does); this one sums per-character advance widths.
 *
 * Widths are Helvetica's standard font metrics (Adobe AFM, units of 1/1000 em; written from memory), scaled
 * to DejaVu Sans, the widest common system sans-serif: measured with Chromium's canvas measureText at 11 px,
 * DejaVu runs 4–9% wider than Helvetica × 1.1 on our labels (8–9% in bold), so the scale is 1.2 (bold ×1.1).
 * Narrower fonts (Segoe UI, Roboto, Helvetica) then get a little spare margin; none gets clipped text.
 */
import * as vega from 'vega';

// Printable ASCII from the space (32) to the tilde (126).
const HELVETICA = [
  278,
  278,
  355,
  556,
  556,
  889,
  667,
  191,
  333,
  333,
  389,
  584,
  278,
  333,
  278,
  278, // space ! " # $ % & ' ( ) * + , - . /
  556,
  556,
  556,
  556,
  556,
  556,
  556,
  556,
  556,
  556,
  278,
  278,
  584,
  584,
  584,
  556, // 0-9 : ; < = > ?
  1015,
  667,
  667,
  722,
  722,
  667,
  611,
  778,
  722,
  278,
  500,
  667,
  556,
  833,
  722,
  778, // @ A-O
  667,
  778,
  722,
  667,
  611,
  722,
  667,
  944,
  667,
  667,
  611,
  278,
  278,
  278,
  469,
  556, // P-Z [ \ ] ^ _
  333,
  556,
  556,
  500,
  556,
  556,
  278,
  556,
  556,
  222,
  222,
  500,
  222,
  833,
  556,
  556, // ` a-o
  556,
  556,
  333,
  500,
  278,
  556,
  500,
  722,
  500,
  500,
  500,
  334,
  260,
  334,
  584, // p-z { | } ~
];
/** Anything outside ASCII (Greek letters, dashes, ±, ·): about the width of a digit. */
const OTHER = 600;
const SCALE = 1.2;
const BOLD = 1.1;

export function textWidth(text: string, fontSize: number, bold = false): number {
  let units = 0;
  for (const ch of text) {
    const code = ch.codePointAt(0)!;
    units += code >= 32 && code <= 126 ? HELVETICA[code - 32] : OTHER;
  }
  return (units / 1000) * fontSize * SCALE * (bold ? BOLD : 1);
}

interface TextItem {
  fontSize?: number | string;
  fontWeight?: number | string;
  limit?: number;
}

type WidthFunction = (item: TextItem, text: unknown) => number;
const metrics = (vega as unknown as { textMetrics: { width: WidthFunction } }).textMetrics;

/** Installs the measure into vega (idempotent); vega calls it for every label, title and legend entry. */
export function useFontMetrics(): void {
  if ((metrics.width as { hhat?: boolean }).hhat) return;
  const width: WidthFunction = (item, text) => {
    const size = item.fontSize != null ? Number(item.fontSize) || 0 : 11;
    const bold = item.fontWeight === 'bold' || Number(item.fontWeight) >= 600;
    // eslint-disable-next-line @typescript-eslint/no-base-to-string -- vega's text is a string or a number here
    const measured = textWidth(text == null ? '' : String(text).trim(), size, bold);
    // Vega truncates text longer than its limit with an ellipsis; the drawn text is then at most that wide.
    return item.limit && item.limit > 0 ? Math.min(measured, item.limit) : measured;
  };
  (width as { hhat?: boolean }).hhat = true;
  metrics.width = width;
}

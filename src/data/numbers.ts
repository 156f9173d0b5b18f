/**
 * Decimal numbers straight from bytes. The fast path is Clinger's: a decimal whose significant digits form
 * an integer of at most 2^53 and whose power of ten is within ±22 is exact as `digits * 10^e` or `digits / 10^-e`, because both
 * operands are exact doubles and IEEE 754 rounds the single operation correctly (W. D. Clinger, "How to read
 * floating point numbers accurately", PLDI 1990). Anything else that matches the grammar goes to `Number`,
 * which rounds correctly as ECMAScript requires, so every accepted field reads as `Number(text)` would.
 */

// 10^0 .. 10^22 are exactly representable; the literals below are exact.
const exactPowersOfTen = new Float64Array(23);
for (let k = 0, p = 1; k <= 22; k++, p *= 10) exactPowersOfTen[k] = p;

const SPACE = 32;
const TAB = 9;
const PLUS = 43;
const MINUS = 45;
const POINT = 46;
const ZERO = 48;
const LOWER_E = 101;
const UPPER_E = 69;

/**
 * Whether appending digit d keeps the mantissa an exact integer double (at most 2^53). Fifteen digits
 * always fit; a sixteenth fits when the result stays at or below 2^53. `mantissa * 10` is exact because it
 * is an even integer below 2^54.
 */
function fitsExactly(mantissa: number, significant: number, d: number): boolean {
  return significant < 15 || (significant === 15 && mantissa * 10 <= 9007199254740992 - d);
}

/**
 * Reads fields of one buffer. Numbers the fast path cannot settle go to `Number` on a substring of the
 * buffer decoded once as Latin-1 (bytes map 1:1 to characters, so offsets agree): cutting a substring is
 * cheaper than decoding each field separately, which matters for files of full-precision numbers.
 */
export class DecimalReader {
  private text: string | null = null;

  constructor(private bytes: Buffer) {}

  /** Reads from new bytes (a window that moved on): the decoded text of the old ones no longer applies. */
  reset(bytes: Buffer): void {
    this.bytes = bytes;
    this.text = null;
  }

  /** As `parseDecimalBytes`, for bytes[start, end) of this reader's buffer. */
  read(start: number, end: number): number {
    return parseDecimalBytes(this.bytes, start, end, this);
  }

  /** Latin-1 text of bytes[start, end); falls back to decoding the field alone past V8's string limit. */
  slice(start: number, end: number): string {
    if (this.text === null) {
      this.text = this.bytes.length < maxWholeText ? latin1(this.bytes, 0, this.bytes.length) : '';
    }
    return this.text.length === this.bytes.length ? this.text.substring(start, end) : latin1(this.bytes, start, end);
  }
}

/** Stays well under V8's largest string (2^29 - 24 characters on 64-bit builds). */
const maxWholeText = 2 ** 28;

/**
 * The number written in bytes[start, end) (surrounding spaces and tabs allowed), or NaN when the text is not
 * a plain decimal number: `[+-]digits[.digits][(e|E)[+-]digits]`, also `.5` and `5.`. Overflow gives ±Infinity.
 */
export function parseDecimalBytes(bytes: Buffer, start: number, end: number, reader?: DecimalReader): number {
  while (start < end && (bytes[start] === SPACE || bytes[start] === TAB)) start++;
  while (end > start && (bytes[end - 1] === SPACE || bytes[end - 1] === TAB)) end--;
  const textStart = start;
  let i = start;
  let negative = false;
  if (i < end && (bytes[i] === MINUS || bytes[i] === PLUS)) {
    negative = bytes[i] === MINUS;
    i++;
  }
  let mantissa = 0;
  let significant = 0;
  let scale = 0; // decimal exponent correction: dropped integer digits (+) and kept fraction digits (-)
  let digits = 0;
  let inexact = false;
  for (; i < end; i++) {
    const d = bytes[i] - ZERO;
    if (d < 0 || d > 9) break;
    digits++;
    if (mantissa === 0 && d === 0) continue;
    if (!inexact && fitsExactly(mantissa, significant, d)) {
      mantissa = mantissa * 10 + d;
      significant++;
    } else {
      inexact = true;
      scale++;
    }
  }
  if (i < end && bytes[i] === POINT) {
    i++;
    for (; i < end; i++) {
      const d = bytes[i] - ZERO;
      if (d < 0 || d > 9) break;
      digits++;
      if (mantissa === 0 && d === 0) {
        scale--;
      } else if (!inexact && fitsExactly(mantissa, significant, d)) {
        mantissa = mantissa * 10 + d;
        significant++;
        scale--;
      } else {
        inexact = true;
      }
    }
  }
  if (digits === 0) return NaN;
  if (i < end && (bytes[i] === LOWER_E || bytes[i] === UPPER_E)) {
    i++;
    let exponentNegative = false;
    if (i < end && (bytes[i] === MINUS || bytes[i] === PLUS)) {
      exponentNegative = bytes[i] === MINUS;
      i++;
    }
    let exponent = 0;
    let exponentDigits = 0;
    for (; i < end; i++) {
      const d = bytes[i] - ZERO;
      if (d < 0 || d > 9) break;
      exponentDigits++;
      // Past this size the value is 0 or Infinity whatever follows; stop growing so the sum stays exact.
      if (exponent < 100000) exponent = exponent * 10 + d;
    }
    if (exponentDigits === 0) return NaN;
    scale += exponentNegative ? -exponent : exponent;
  }
  if (i !== end) return NaN;
  if (mantissa === 0 && !inexact) return negative ? -0 : 0;
  if (!inexact && scale >= -22 && scale <= 22) {
    const magnitude = scale >= 0 ? mantissa * exactPowersOfTen[scale] : mantissa / exactPowersOfTen[-scale];
    return negative ? -magnitude : magnitude;
  }
  return Number(reader ? reader.slice(textStart, end) : latin1(bytes, textStart, end));
}

/** ASCII/Latin-1 bytes as a string; `latin1Slice` is Buffer's own method, minus the encoding dispatch. */
function latin1(bytes: Buffer, start: number, end: number): string {
  return (bytes as unknown as { latin1Slice(start: number, end: number): string }).latin1Slice(start, end);
}

const decimalPattern = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/** The same grammar as `parseDecimalBytes`, for text that is already a string (quoted fields, JSON keys). */
export function parseDecimalText(text: string): number {
  const trimmed = text.replace(/^[ \t]+|[ \t]+$/g, '');
  return decimalPattern.test(trimmed) ? Number(trimmed) : NaN;
}

/** Words people and programs write for missing or non-finite values. */
const nonFiniteWords = new Set(['nan', 'inf', 'infinity', 'na', 'n/a', 'nd', 'null', 'none', 'missing', '?', '-', '.', '1.#inf', '1.#qnan', '-1.#inf']);

/**
 * Why a field that `parseDecimal*` rejected (or read as ±Infinity) is not usable, as the tail of a message:
 * `"NaN" is not a finite number...` or `"abc" is not a number...`.
 */
export function describeBadNumber(text: string): string {
  const trimmed = text.replace(/^[ \t]+|[ \t]+$/g, '');
  if (trimmed === '') return 'the field is empty; every value must be a finite number (remove or impute missing values)';
  const word = trimmed.replace(/^[+-]/, '').toLowerCase();
  if (nonFiniteWords.has(word) || nonFiniteWords.has(trimmed.toLowerCase())) {
    return `${JSON.stringify(trimmed)} is not a finite number; remove or impute missing and infinite values`;
  }
  if (decimalPattern.test(trimmed)) {
    return `${JSON.stringify(trimmed)} is not a finite number (it overflows a double)`;
  }
  const shown = trimmed.length > 40 ? `${trimmed.slice(0, 40)}…` : trimmed;
  const hint = /^[+-]?\d+,\d+$/.test(trimmed)
    ? ' (decimal commas are not read; write 1.5, not 1,5)'
    : /^0[xXbBoO]/.test(trimmed)
      ? ' (only decimal numbers are read)'
      : '';
  return `${JSON.stringify(shown)} is not a number; expected a decimal such as -1.25 or 3e-4${hint}`;
}

/** Whether a rejected field is a missing/non-finite marker rather than text (used to spot header rows). */
export function looksLikeMissing(text: string): boolean {
  const trimmed = text.replace(/^[ \t]+|[ \t]+$/g, '');
  if (trimmed === '') return true;
  const lower = trimmed.toLowerCase();
  return nonFiniteWords.has(lower) || nonFiniteWords.has(lower.replace(/^[+-]/, '')) || decimalPattern.test(trimmed);
}

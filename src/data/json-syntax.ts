/**
 * Finds where JSON text goes wrong, for a one-line message with line and column. Run only after
 * `JSON.parse` has failed: V8's messages give no position for many errors, and quote the whole input.
 * The grammar is RFC 8259's.
 */

export interface JsonSyntaxProblem {
  /** Offset into the text, in UTF-16 code units. */
  offset: number;
  line: number;
  column: number;
  problem: string;
}

const ARRAY = 1;
const OBJECT = 2;
const numberPattern = /-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][+-]?\d+)?/y;
const escapePattern = /\\(?:["\\/bfnrt]|u[0-9a-fA-F]{4})/y;

export function locateJsonError(text: string): JsonSyntaxProblem | null {
  const length = text.length;
  const stack: number[] = [];
  let pos = 0;
  const at = (problem: string): JsonSyntaxProblem => {
    let line = 1;
    let lineStart = 0;
    for (let i = 0; i < pos && i < length; i++) {
      if (text.charCodeAt(i) === 10) {
        line++;
        lineStart = i + 1;
      }
    }
    return { offset: pos, line, column: pos - lineStart + 1, problem };
  };
  const skipSpace = (): void => {
    while (pos < length) {
      const c = text.charCodeAt(pos);
      if (c !== 32 && c !== 9 && c !== 10 && c !== 13) break;
      pos++;
    }
  };
  /** Reads a string at pos; returns a problem or null. */
  const readString = (): JsonSyntaxProblem | null => {
    pos++;
    for (;;) {
      if (pos >= length) return at('a string is never closed');
      const c = text.charCodeAt(pos);
      if (c === 34) {
        pos++;
        return null;
      }
      if (c === 92) {
        escapePattern.lastIndex = pos;
        if (!escapePattern.test(text)) return at('a string has an invalid escape');
        pos = escapePattern.lastIndex;
        continue;
      }
      if (c < 32) return at('a string holds a raw control character or line break');
      pos++;
    }
  };
  const readKey = (): JsonSyntaxProblem | null => {
    skipSpace();
    if (text[pos] !== '"') return at('expected a quoted key');
    const problem = readString();
    if (problem) return problem;
    skipSpace();
    if (text[pos] !== ':') return at("expected ':' after a key");
    pos++;
    return null;
  };
  const notAValue = (): JsonSyntaxProblem => {
    if (pos >= length) return at('the text ends where a value was expected');
    const word = /^-?(NaN|Infinity|inf|nan)/.exec(text.slice(pos, pos + 10));
    if (word) return at(`${word[0]} is not valid JSON and not a finite number; remove or impute the value`);
    if (text[pos] === "'") return at('strings and keys need double quotes');
    return at(`unexpected ${JSON.stringify(text[pos])} where a value was expected`);
  };

  value: for (;;) {
    skipSpace();
    if (pos >= length) return notAValue();
    const c = text[pos];
    if (c === '[') {
      pos++;
      skipSpace();
      if (text[pos] === ']') pos++;
      else {
        stack.push(ARRAY);
        continue value;
      }
    } else if (c === '{') {
      pos++;
      skipSpace();
      if (text[pos] === '}') pos++;
      else {
        const problem = readKey();
        if (problem) return problem;
        stack.push(OBJECT);
        continue value;
      }
    } else if (c === '"') {
      const problem = readString();
      if (problem) return problem;
    } else if (c === '-' || (c >= '0' && c <= '9')) {
      numberPattern.lastIndex = pos;
      if (!numberPattern.test(text)) return notAValue();
      pos = numberPattern.lastIndex;
    } else if (text.startsWith('true', pos)) pos += 4;
    else if (text.startsWith('false', pos)) pos += 5;
    else if (text.startsWith('null', pos)) pos += 4;
    else return notAValue();

    // After a complete value: close containers or move to the next element.
    for (;;) {
      skipSpace();
      if (stack.length === 0) {
        return pos < length ? at('unexpected text after the end of the JSON value') : null;
      }
      const container = stack[stack.length - 1];
      const next = text[pos];
      if (next === ',') {
        pos++;
        skipSpace();
        if (text[pos] === (container === ARRAY ? ']' : '}')) return at('a trailing comma is not allowed');
        if (container === OBJECT) {
          const problem = readKey();
          if (problem) return problem;
        }
        continue value;
      }
      if (container === ARRAY && next === ']') {
        pos++;
        stack.pop();
        continue;
      }
      if (container === OBJECT && next === '}') {
        pos++;
        stack.pop();
        continue;
      }
      if (pos >= length) return at(`the text ends inside ${container === ARRAY ? 'an array' : 'an object'}`);
      return at(container === ARRAY ? "expected ',' or ']' after an array element" : "expected ',' or '}' after an object value");
    }
  }
}

/**
 * The first key that appears twice in one object of valid JSON text, with where its second copy starts. JSON.parse
 * keeps the last copy silently; in a plan file that drops a whole list of estimators or scenarios unsaid.
 */
export function findDuplicateKey(text: string): { key: string; line: number; column: number } | null {
  // One entry per open container: the keys seen so far for an object, null for an array.
  const open: (Set<string> | null)[] = [];
  let expectKey = false;
  let line = 1;
  let lineStart = 0;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (c === 10) {
      line++;
      lineStart = i + 1;
    } else if (c === 123 /* { */) {
      open.push(new Set());
      expectKey = true;
    } else if (c === 91 /* [ */) {
      open.push(null);
      expectKey = false;
    } else if (c === 125 /* } */ || c === 93 /* ] */) {
      open.pop();
      expectKey = false;
    } else if (c === 44 /* , */) {
      expectKey = open.at(-1) instanceof Set;
    } else if (c === 34 /* " */) {
      const start = i;
      for (i++; text.charCodeAt(i) !== 34; i++) if (text.charCodeAt(i) === 92) i++;
      if (!expectKey) continue;
      const keys = open.at(-1) as Set<string>;
      const key = JSON.parse(text.slice(start, i + 1)) as string;
      if (keys.has(key)) return { key, line, column: start - lineStart + 1 };
      keys.add(key);
      expectKey = false;
    }
  }
  return null;
}

/**
 * Where JSON text breaks, for messages people can act on: the offset of the first character that cannot
 * continue a JSON document (RFC 8259), and what was expected there. Node's own message does not always give
 * a position, and quotes the text itself, which may be long.
 */

/** The first syntax error in a JSON text. */
export interface JsonSyntaxProblem {
  /** Offset (UTF-16 code units) of the character that cannot follow. */
  offset: number;
  /** What is wrong there, for people. */
  problem: string;
}

const NUMBER = /-?(0|[1-9]\d*)(\.\d+)?([eE][+-]?\d+)?/y;
const ESCAPES = '"\\/bfnrt';
const HEX4 = /^[0-9a-fA-F]{4}$/;

/** One character as a message shows it: quoted, with invisible ones escaped. */
function shown(c: string | undefined): string {
  return c === undefined ? 'the end of the text' : JSON.stringify(c);
}

/**
 * Finds the first syntax error of a JSON text, or returns null when the text is valid JSON. Iterative,
 * so deep nesting cannot overflow the stack.
 *
 * @example
 *   findJsonError('{"a": 1,}'); // { offset: 8, problem: 'expected a property name in double quotes, found "}"' }
 */
export function findJsonError(text: string): JsonSyntaxProblem | null {
  const n = text.length;
  let i = 0;
  /** Open containers: true for an object, false for an array. */
  const open: boolean[] = [];
  const at = (problem: string): JsonSyntaxProblem => ({ offset: i, problem });
  const skipSpace = (): void => {
    while (i < n) {
      const c = text.charCodeAt(i);
      if (c !== 0x20 && c !== 0x09 && c !== 0x0a && c !== 0x0d) break;
      i++;
    }
  };
  const string = (): JsonSyntaxProblem | null => {
    i++;
    while (i < n) {
      const c = text.charCodeAt(i);
      if (c === 0x22) {
        i++;
        return null;
      }
      if (c < 0x20) return at('a control character (such as a line break) inside a string; write it as \\n or remove it');
      if (c === 0x5c) {
        const e = text[i + 1];
        if (e !== undefined && ESCAPES.includes(e)) i += 2;
        else if (e === 'u' && HEX4.test(text.slice(i + 2, i + 6))) i += 6;
        else return { offset: i + 1, problem: 'a backslash that starts no valid escape inside a string' };
        continue;
      }
      i++;
    }
    return at('a string that is never closed (a missing ")');
  };
  /** A value at i: null when a scalar was read, 'open' when a container was opened, or the problem. */
  const value = (): JsonSyntaxProblem | 'open' | null => {
    skipSpace();
    const c = text[i];
    if (c === '{' || c === '[') {
      open.push(c === '{');
      i++;
      return 'open';
    }
    if (c === '"') return string();
    for (const word of ['true', 'false', 'null']) {
      if (text.startsWith(word, i)) {
        i += word.length;
        return null;
      }
    }
    NUMBER.lastIndex = i;
    if (c !== undefined && NUMBER.exec(text)) {
      i = NUMBER.lastIndex;
      // "1." and "1e" stop short: the error is at the character after the dot or exponent mark.
      if ('.eE'.includes(text[i] ?? ' ')) return { offset: i + 1, problem: 'a number cut short (digits must follow "." and "e")' };
      return null;
    }
    if (c === '-') return { offset: i + 1, problem: 'a minus sign with no number after it' };
    return at(`expected a value, found ${shown(c)}`);
  };
  const member = (): JsonSyntaxProblem | 'open' | null => {
    skipSpace();
    if (text[i] !== '"') return at(`expected a property name in double quotes, found ${shown(text[i])}`);
    const problem = string();
    if (problem) return problem;
    skipSpace();
    if (text[i] !== ':') return at(`expected ":" after the property name, found ${shown(text[i])}`);
    i++;
    return value();
  };

  let step = value();
  for (;;) {
    if (step !== null && step !== 'open') return step;
    skipSpace();
    const inObject = open.at(-1);
    const close = inObject ? '}' : ']';
    if (step === 'open') {
      // Just opened: an empty container, or its first member.
      if (text[i] === close) {
        i++;
        open.pop();
        step = null;
      } else step = inObject ? member() : value();
      continue;
    }
    if (inObject === undefined) return i >= n ? null : at(`${shown(text[i])} after the end of the JSON value`);
    if (text[i] === ',') {
      i++;
      step = inObject ? member() : value();
    } else if (text[i] === close) {
      i++;
      open.pop();
    } else {
      return at(`expected "," or "${close}", found ${shown(text[i])}`);
    }
  }
}

/**
 * Line and column (both from 1) of an offset in a text.
 *
 * @example
 *   lineColumn('{\n  "a" 1\n}', 8); // { line: 2, column: 7 }
 */
export function lineColumn(text: string, offset: number): { line: number; column: number } {
  let line = 1;
  let start = 0;
  for (let k = text.indexOf('\n'); k !== -1 && k < offset; k = text.indexOf('\n', k + 1)) {
    line++;
    start = k + 1;
  }
  return { line, column: offset - start + 1 };
}

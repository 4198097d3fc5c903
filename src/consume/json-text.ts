/**
 * Small helpers over JSON text and input text that end up in messages. Pure.
 */

/**
 * The first key that appears twice in one object of a JSON text, with the character
 * offset of its second appearance, or null. `JSON.parse` keeps the last of repeated
 * keys without a word (RFC 8259 §4 leaves the behaviour open); pairflow refuses them
 * instead, so `{"t": 1, …, "t": 2}` cannot pass for a valid event. Call it on text
 * that `JSON.parse` accepted: it only tracks strings and nesting.
 * @example findDuplicateKey('{"a":1,"b":{"a":2},"a":3}') // { key: 'a', offset: 19 }
 */
export function findDuplicateKey(text: string): { key: string; offset: number } | null {
  const stack: (Set<string> | null)[] = [];
  let expectKey = false;
  for (let i = 0; i < text.length; i++) {
    const ch = text.charCodeAt(i);
    if (ch === 0x22) {
      let j = i + 1;
      while (j < text.length && text.charCodeAt(j) !== 0x22) j += text.charCodeAt(j) === 0x5c ? 2 : 1;
      if (expectKey) {
        const raw = text.slice(i, j + 1);
        const key = raw.includes('\\') ? (JSON.parse(raw) as string) : raw.slice(1, -1);
        const keys = stack[stack.length - 1]!;
        if (keys.has(key)) return { key, offset: i };
        keys.add(key);
        expectKey = false;
      }
      i = j;
    } else if (ch === 0x7b) {
      stack.push(new Set());
      expectKey = true;
    } else if (ch === 0x5b) {
      stack.push(null);
      expectKey = false;
    } else if (ch === 0x7d || ch === 0x5d) {
      stack.pop();
      expectKey = false;
    } else if (ch === 0x2c) {
      expectKey = stack[stack.length - 1] instanceof Set;
    }
  }
  return null;
}

/**
 * Counts `":` in a text: at least the number of keys of a JSON text (more when string
 * values hold the pair). With {@link findDuplicateKey} as the exact check behind it,
 * a flat object whose count equals its key count is known free of repeats at the
 * cost of one native search per key.
 */
export function keyMarks(text: string): number {
  let n = 0;
  for (let at = text.indexOf('":'); at !== -1; at = text.indexOf('":', at + 2)) n++;
  return n;
}

/**
 * Text as it may appear inside a one-line message: control characters (a NUL, a lone
 * CR, a tab) become `\u0000`-style escapes, so a message never carries raw bytes
 * that a terminal or a log reader would act on.
 * @example printable('a\u0000b\rc') // 'a\\u0000b\\u000dc'
 */
export function printable(text: string): string {
  // eslint-disable-next-line no-control-regex
  return text.replace(/[\u0000-\u001f\u007f]/g, (c) => `\\u${c.charCodeAt(0).toString(16).padStart(4, '0')}`);
}

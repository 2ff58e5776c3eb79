/**
 * The byte level of a session file: its size, signatures of binary formats people upload by mistake,
 * NUL bytes, and UTF-8 validity (buffer.isUtf8, native) across chunk boundaries. The bytes go on to
 * csv-parse as they come (it decodes each field itself); here they are only checked. Node-only.
 */
import { isUtf8 } from 'node:buffer';
import type { ProblemFn } from './session-header';
import { formatBytes } from '../shared/display';

/** File signatures of common binary formats people upload by mistake. */
function binarySignature(b: Uint8Array): string | undefined {
  const starts = (...sig: number[]) => sig.every((v, k) => b[k] === v);
  if (starts(0x89, 0x50, 0x4e, 0x47)) return 'a PNG image';
  if (starts(0x50, 0x4b, 0x03, 0x04) || starts(0x50, 0x4b, 0x05, 0x06)) return 'a ZIP archive (or an Excel .xlsx workbook)';
  if (starts(0x25, 0x50, 0x44, 0x46)) return 'a PDF document';
  if (starts(0x1f, 0x8b)) return 'a gzip archive';
  if (starts(0xff, 0xd8, 0xff)) return 'a JPEG image';
  if (starts(0xd0, 0xcf, 0x11, 0xe0)) return 'an old Office document (e.g. Excel .xls)';
  if (starts(0xff, 0xfe) || starts(0xfe, 0xff)) return 'UTF-16 text (save it as UTF-8)';
  return undefined;
}

async function* chunksOf(source: string | AsyncIterable<Uint8Array | string>): AsyncGenerator<Uint8Array | string> {
  if (typeof source === 'string') {
    // Slices of the caller's string: no second copy of the whole text.
    const step = 1 << 16;
    for (let k = 0; k < source.length; k += step) yield source.slice(k, k + step);
    return;
  }
  yield* source;
}

/** Length of the UTF-8 sequence a lead byte starts (1 for ASCII or a stray continuation byte). */
function utf8Length(lead: number): number {
  return lead >= 0xf0 ? 4 : lead >= 0xe0 ? 3 : lead >= 0xc0 ? 2 : 1;
}

/** Bytes at the end of `c` (from `from`) that start a multi-byte sequence not yet complete. */
function incompleteTail(c: Uint8Array, from: number): number {
  for (let k = 1; k <= 3 && c.length - k >= from; k++) {
    const b = c[c.length - k];
    if ((b & 0xc0) === 0x80) continue; // continuation byte: look further back
    return b >= 0xc0 && utf8Length(b) > k ? k : 0;
  }
  return 0;
}

/** Line breaks in c before position `end`. */
export function countNl(c: Uint8Array | string, end: number): number {
  let count = 0;
  if (typeof c === 'string') {
    for (let k = c.indexOf('\n'); k >= 0 && k < end; k = c.indexOf('\n', k + 1)) count++;
  } else {
    for (let k = 0; k < end; k++) if (c[k] === 10) count++;
  }
  return count;
}

/** What the byte check has seen so far. */
export interface ByteState {
  bytes: number;
  /** Any non-whitespace character. */
  sawText: boolean;
  /** The start of the file (first lines), for delimiter sniffing. */
  head: string;
}

/**
 * The chunks of `source`, checked as they pass (a leading byte-order mark dropped); `fatal` is called
 * (and must throw) on the first thing that makes the file unreadable. `state` fills in as they pass.
 */
export function checkedChunks(
  source: string | AsyncIterable<Uint8Array | string>, maxBytes: number, fatal: ProblemFn,
): { chunks: AsyncGenerator<Uint8Array | string>; state: ByteState } {
  const state: ByteState = { bytes: 0, sawText: false, head: '' };
  let firstBytes = true;
  let carry: Uint8Array | undefined; // an incomplete UTF-8 sequence at the end of the previous chunk

  const HEAD_BYTES = 4096;
  const takeHead = (c: Uint8Array | string) => {
    if (state.head.length < HEAD_BYTES) state.head += typeof c === 'string' ? c.slice(0, HEAD_BYTES) : new TextDecoder().decode(c.subarray(0, HEAD_BYTES));
    if (!state.sawText) {
      if (typeof c === 'string') state.sawText = /\S/.test(c);
      else for (let k = 0; k < c.length && !state.sawText; k++) state.sawText = c[k] > 32;
    }
  };

  // Physical lines seen so far at the byte level, so binary content can be located.
  let newlines = 0;
  const tooBig = () =>
    fatal({ message: `the file is larger than the limit of ${formatBytes(maxBytes)} (reading stopped at ${formatBytes(state.bytes)})`, expected: 'a smaller session file' });
  const nul = (c: Uint8Array | string, at: number) =>
    fatal({ line: newlines + countNl(c, at) + 1, message: 'not a CSV text file: it contains NUL bytes (binary data)', expected: 'a UTF-8 CSV text file' });
  const notUtf8 = (c: Uint8Array) => {
    // Locate the first undecodable byte for the message (slow path, only on failure).
    const loose = new TextDecoder('utf-8').decode(c);
    const at = loose.indexOf('\ufffd');
    fatal({
      line: newlines + countNl(loose, at < 0 ? loose.length : at) + 1,
      message: 'not a CSV text file: the bytes are not valid UTF-8',
      expected: 'a UTF-8 CSV text file (save as "CSV UTF-8")',
    });
  };
  const checkUtf8 = (c: Uint8Array) => {
    let from = 0;
    if (carry) {
      // finish the sequence split across chunks: at most 3 more bytes
      const need = utf8Length(carry[0]) - carry.length;
      const joined = new Uint8Array(carry.length + Math.min(need, c.length));
      joined.set(carry);
      joined.set(c.subarray(0, need), carry.length);
      if (joined.length < utf8Length(carry[0])) { carry = joined; return; }
      if (!isUtf8(joined)) notUtf8(joined);
      from = need;
      carry = undefined;
    }
    const tail = incompleteTail(c, from);
    if (!isUtf8(c.subarray(from, c.length - tail))) notUtf8(c.subarray(from));
    if (tail) carry = c.slice(c.length - tail);
  };

  async function* checked(): AsyncGenerator<Uint8Array | string> {
    for await (const chunk of chunksOf(source)) {
      if (typeof chunk === 'string') {
        state.bytes += Buffer.byteLength(chunk);
        if (state.bytes > maxBytes) tooBig();
        const z = chunk.indexOf('\0');
        if (z >= 0) nul(chunk, z);
        if (!chunk) continue;
        const s = firstBytes && chunk.charCodeAt(0) === 0xfeff ? chunk.slice(1) : chunk;
        firstBytes = false;
        newlines += countNl(s, s.length);
        takeHead(s);
        yield s;
        continue;
      }
      if (chunk.byteLength === 0) continue;
      state.bytes += chunk.byteLength;
      if (state.bytes > maxBytes) tooBig();
      if (firstBytes) {
        const kind = binarySignature(chunk);
        if (kind) fatal({ line: 1, message: `not a CSV text file: it looks like ${kind}`, expected: 'a UTF-8 CSV text file' });
      }
      const z = chunk.indexOf(0);
      if (z >= 0) nul(chunk, z);
      checkUtf8(chunk);
      // a UTF-8 byte-order mark is accepted and dropped
      const c = firstBytes && chunk[0] === 0xef && chunk[1] === 0xbb && chunk[2] === 0xbf ? chunk.subarray(3) : chunk;
      firstBytes = false;
      newlines += countNl(c, c.length);
      takeHead(c);
      yield c;
    }
    if (carry) fatal({ line: newlines + 1, message: 'not a CSV text file: the bytes are not valid UTF-8 (truncated character at the end)', expected: 'a UTF-8 CSV text file' });
  }
  return { chunks: checked(), state };
}

/**
 * A small streaming reader for multipart/form-data (RFC 7578 over the RFC 2046 multipart syntax).
 *
 * Why our own: `request.formData()` buffers the whole body (a 100 000-row session would sit in memory
 * several times), and no maintained streaming parser is among our dependencies. Only what browsers and
 * curl send is supported: CRLF line ends, `Content-Disposition: form-data; name=…; filename=…` and an
 * optional `Content-Type` per part. Part bodies are handed out chunk by chunk as they arrive; a part the
 * consumer does not read to the end is skipped when the next part is asked for.
 */

export interface MultipartPart {
  /** The form field name. */
  name: string;
  /** Present for file parts (may be ''), as sent: callers sanitise it. */
  filename?: string;
  contentType?: string;
  /** The part's bytes; read it before asking for the next part (unread data is skipped). */
  data: AsyncIterable<Buffer>;
}

export class MultipartError extends Error {}

const CRLF = Buffer.from('\r\n');
const HEADER_END = Buffer.from('\r\n\r\n');
const MAX_HEADER_BYTES = 16 * 1024;

/** The boundary of a multipart/form-data content type, or undefined when it is not one. */
export function multipartBoundary(contentType: string | null): string | undefined {
  if (!contentType || !/^multipart\/form-data\s*;/i.test(contentType)) return undefined;
  const m = /;\s*boundary=(?:"([^"]{1,70})"|([^\s;]{1,70}))/i.exec(contentType);
  return m ? (m[1] ?? m[2]) : undefined;
}

/** Decode a quoted-string parameter value (backslash escapes) or a token. */
function param(header: string, key: string): string | undefined {
  const re = new RegExp(`;\\s*${key}\\s*=\\s*(?:"((?:[^"\\\\]|\\\\.)*)"|([^;\\s]*))`, 'i');
  const m = re.exec(header);
  if (!m) return undefined;
  return m[1] !== undefined ? m[1].replace(/\\(.)/g, '$1') : m[2];
}

function parseHeaders(block: string): { name: string; filename?: string; contentType?: string } {
  let disposition: string | undefined;
  let contentType: string | undefined;
  for (const line of block.split('\r\n')) {
    const i = line.indexOf(':');
    if (i < 0) continue;
    const key = line.slice(0, i).trim().toLowerCase();
    const value = line.slice(i + 1).trim();
    if (key === 'content-disposition') disposition = value;
    else if (key === 'content-type') contentType = value;
  }
  if (!disposition || !/^form-data\b/i.test(disposition)) throw new MultipartError('a multipart part has no "Content-Disposition: form-data" header');
  const name = param(disposition, 'name');
  if (name === undefined) throw new MultipartError('a multipart part has no field name');
  // filename* (RFC 5987) wins over filename when a client sends both.
  const extended = param(disposition, 'filename\\*');
  let filename = param(disposition, 'filename');
  if (extended) {
    const m = /^utf-8''(.*)$/i.exec(extended);
    if (m) {
      try {
        filename = decodeURIComponent(m[1]);
      } catch {
        // keep the plain filename
      }
    }
  }
  return { name, filename, contentType };
}

/**
 * Read the parts of a multipart body in order. `body` is the request body stream (Web ReadableStream or
 * any async iterable of bytes). Throws MultipartError for malformed bodies (also when it ends early).
 */
export async function* readMultipart(body: AsyncIterable<Uint8Array>, boundary: string): AsyncGenerator<MultipartPart> {
  const source = body[Symbol.asyncIterator]();
  // A virtual CRLF in front lets the first boundary be found like every other ("\r\n--boundary").
  const delimiter = Buffer.from(`\r\n--${boundary}`);
  let buf: Buffer = Buffer.from(CRLF);
  let ended = false;

  const fill = async (): Promise<boolean> => {
    if (ended) return false;
    const next = await source.next();
    if (next.done) {
      ended = true;
      return false;
    }
    const chunk = Buffer.from(next.value.buffer, next.value.byteOffset, next.value.byteLength);
    buf = buf.length ? Buffer.concat([buf, chunk]) : chunk;
    return true;
  };

  /** Bytes up to the next delimiter; leaves buf starting at the delimiter. */
  async function* partData(): AsyncGenerator<Buffer> {
    for (;;) {
      const at = buf.indexOf(delimiter);
      if (at >= 0) {
        if (at > 0) {
          const out = buf.subarray(0, at);
          buf = buf.subarray(at);
          yield out;
        }
        return;
      }
      // Keep a tail that could be the start of the delimiter.
      const keep = Math.min(buf.length, delimiter.length - 1);
      if (buf.length > keep) {
        const out = buf.subarray(0, buf.length - keep);
        buf = buf.subarray(buf.length - keep);
        yield out;
      }
      if (!(await fill())) throw new MultipartError('the multipart body ended before its closing boundary');
    }
  }

  try {
    // Skip any preamble up to the first delimiter.
    for (;;) {
      const at = buf.indexOf(delimiter);
      if (at >= 0) {
        buf = buf.subarray(at);
        break;
      }
      buf = buf.subarray(Math.max(0, buf.length - delimiter.length + 1));
      if (!(await fill())) throw new MultipartError('the body is not multipart/form-data: no boundary found');
    }
    for (;;) {
      // buf starts at a delimiter: then "--" (the end) or transport padding and CRLF (a part follows).
      while (buf.length < delimiter.length + 2) if (!(await fill())) throw new MultipartError('the multipart body ended after a boundary');
      if (buf[delimiter.length] === 0x2d && buf[delimiter.length + 1] === 0x2d) return; // closing delimiter; the epilogue is ignored
      let rest: Buffer;
      let eol: number;
      for (;;) {
        rest = buf.subarray(delimiter.length);
        eol = rest.indexOf(CRLF);
        if (eol >= 0) break;
        if (rest.length > 256) throw new MultipartError('malformed multipart boundary line');
        if (!(await fill())) throw new MultipartError('the multipart body ended after a boundary');
      }
      if (rest.subarray(0, eol).toString('latin1').trim() !== '') throw new MultipartError('malformed multipart boundary line');
      buf = rest.subarray(eol + 2);
      let headerEnd: number;
      // A part with no headers starts with CRLF directly.
      while ((headerEnd = buf.indexOf(HEADER_END)) < 0 && !(buf.subarray(0, 2).equals(CRLF))) {
        if (buf.length > MAX_HEADER_BYTES) throw new MultipartError('a multipart part header is too long');
        if (!(await fill())) throw new MultipartError('the multipart body ended inside a part header');
      }
      const block = headerEnd >= 0 ? buf.subarray(0, headerEnd).toString('utf8') : '';
      buf = headerEnd >= 0 ? buf.subarray(headerEnd + 4) : buf.subarray(2);
      const headers = parseHeaders(block);
      const data = partData();
      yield { ...headers, data };
      // Skip whatever the consumer left unread (also after it stopped early).
      const rest2 = partData();
      for await (const _ of rest2) {
        // discard
      }
    }
  } finally {
    await source.return?.();
  }
}

/**
 * multipart/form-data (RFC 7578) read as a stream with busboy, the parser Node's web frameworks use, behind
 * a pull interface: parts come one at a time in the order sent, a part's bytes are handed out chunk by chunk
 * as they arrive (nothing is buffered whole), and a part the consumer does not read to the end is skipped
 * when the next part is asked for. Busboy's own limits bound what a hostile body can make us hold: field
 * values, header sizes, the number of parts.
 */
import busboy from 'busboy';
import type { Readable } from 'node:stream';

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

export interface MultipartLimits {
  /** Largest text field value kept; a longer one arrives cut to this length + 1 byte so callers can tell. */
  fieldBytes?: number;
  /** Most parts (fields and files together). */
  parts?: number;
}

/** The boundary of a multipart/form-data content type, or undefined when it is not one. */
export function multipartBoundary(contentType: string | null): string | undefined {
  if (!contentType || !/^multipart\/form-data\s*;/i.test(contentType)) return undefined;
  const m = /;\s*boundary=(?:"([^"]{1,70})"|([^\s;]{1,70}))/i.exec(contentType);
  return m ? (m[1] ?? m[2]) : undefined;
}

type Event = { kind: 'part'; part: MultipartPart; skip: () => void } | { kind: 'error'; error: Error } | { kind: 'end' };

/** A file stream's chunks, without destroying the stream when the consumer stops early (it is skipped instead). */
function chunksOf(stream: Readable, failure: () => Error | undefined): AsyncIterable<Buffer> {
  return {
    async *[Symbol.asyncIterator]() {
      for (;;) {
        let chunk: Buffer | null;
        while ((chunk = stream.read() as Buffer | null) !== null) yield chunk;
        const failed = failure();
        if (failed) throw failed;
        if (stream.readableEnded) return;
        await new Promise<void>((resolve) => {
          const done = () => {
            stream.off('readable', done);
            stream.off('end', done);
            stream.off('close', done);
            resolve();
          };
          stream.on('readable', done);
          stream.on('end', done);
          stream.on('close', done);
        });
      }
    },
  };
}

/** Read a multipart/form-data body part by part. Malformed bodies throw MultipartError. */
export async function* readMultipart(body: AsyncIterable<Uint8Array>, boundary: string, limits: MultipartLimits = {}): AsyncGenerator<MultipartPart> {
  let parser: busboy.Busboy;
  try {
    parser = busboy({
      headers: { 'content-type': `multipart/form-data; boundary="${boundary.replace(/["\\]/g, '')}"` },
      defParamCharset: 'utf8',
      // File names reach the caller as sent, so its own checks see (and refuse) path-like names.
      preservePath: true,
      limits: { fieldSize: (limits.fieldBytes ?? 64 * 1024) + 1, parts: limits.parts ?? 100, headerPairs: 20, fieldNameSize: 200 },
    });
  } catch (e) {
    throw new MultipartError((e as Error).message);
  }
  const queue: Event[] = [];
  let wake: (() => void) | undefined;
  let failed: Error | undefined;
  let stopped = false;
  const push = (e: Event) => {
    queue.push(e);
    wake?.();
  };
  const fail = (error: Error) => {
    if (failed) return;
    failed = error instanceof MultipartError ? error : new MultipartError(error.message.replace(/\.$/, '').toLowerCase());
    push({ kind: 'error', error: failed });
  };
  parser.on('field', (name, value, info) => {
    const bytes = Buffer.from(value, 'utf8');
    // A cut value is handed on one byte longer than the limit, so the caller's own length check refuses it.
    const data = info.valueTruncated ? Buffer.concat([bytes, Buffer.from(' ')]) : bytes;
    push({ kind: 'part', part: { name, data: (async function* () { yield data; })() }, skip: () => undefined });
  });
  parser.on('file', (name, stream, info) => {
    stream.on('error', (e: Error) => fail(e));
    const part: MultipartPart = { name, filename: info.filename ?? '', contentType: info.mimeType, data: chunksOf(stream, () => failed) };
    push({ kind: 'part', part, skip: () => stream.resume() });
  });
  parser.on('partsLimit', () => fail(new MultipartError(`the form has more than ${limits.parts ?? 100} parts`)));
  parser.on('error', (e: Error) => fail(e));
  let finished = false;
  parser.on('close', () => {
    // A normal end of the form (not our own destroy() after the consumer stopped).
    if (!stopped && !failed) finished = true;
    push({ kind: 'end' });
  });

  // Feed the body in, waiting whenever busboy (or a file stream the consumer has not read yet) is full.
  const pump = (async () => {
    for await (const chunk of body) {
      // After the closing boundary, a malformed part or the consumer stopping, the rest is read and
      // dropped (the route's body limit bounds it): leaving the loop early would cancel the request body,
      // and Node then destroys the socket, just after the answer went out on it, so a client that keeps the
      // connection alive sends its next request into a reset.
      if (failed || finished || stopped) continue;
      if (!parser.write(chunk)) await new Promise<void>((resolve) => {
        const go = () => {
          parser.off('drain', go);
          parser.off('close', go);
          parser.off('error', go);
          resolve();
        };
        parser.on('drain', go);
        parser.on('close', go);
        parser.on('error', go);
      });
    }
    if (!stopped && !failed && !finished) parser.end();
  })().catch((e: Error) => {
    // The body's own error (e.g. a size cap) is the caller's to see as it is.
    failed ??= e;
    push({ kind: 'error', error: e });
  });

  try {
    for (;;) {
      while (!queue.length) await new Promise<void>((resolve) => (wake = resolve));
      wake = undefined;
      const event = queue.shift()!;
      if (event.kind === 'end') return;
      if (event.kind === 'error') throw event.error;
      yield event.part;
      event.skip();
    }
  } finally {
    stopped = true;
    parser.removeAllListeners('drain');
    parser.destroy();
    void pump;
  }
}

/**
 * Request bodies are limited while they stream, on every API route and on the sign-in callback: a declared
 * Content-Length over the route's limit is refused before a byte is read, and a chunked body is counted as it
 * arrives and cut off at the limit (the endpoint's read fails, the answer is 413). Nothing is ever read whole
 * before it is refused.
 */
import { PROGRAM_MAX_BYTES } from '../engine/program-csv';
import { config } from './config';

export class BodyTooLarge extends Error {
  constructor(readonly limit: number) {
    super(`Request body over ${limit} bytes.`);
  }
}

export const DEFAULT_BODY_LIMIT = 1024 * 1024;
export const AUTH_BODY_LIMIT = 64 * 1024;

/**
 * Routes whose endpoint limits its body itself, while it streams, with a message naming its own limit: the
 * session upload (declared Content-Length checked first, then every byte counted in session-intake.ts, up to
 * MAX_UPLOAD_BYTES, with an answer naming that limit), so it is not counted a second time here.
 */
export const LIMITED_BY_ENDPOINT = new Set(['/api/sessions']);

/** The body limit for a route (file-route form) and method. */
export function bodyLimit(route: string, method: string): number {
  if (route === '/api/auth/[...auth]') return AUTH_BODY_LIMIT;
  // The session upload: the file limit plus room for the form fields and multipart framing.
  if (route === '/api/sessions' && method === 'POST') return config().MAX_UPLOAD_BYTES + 512 * 1024;
  // A robot program to compensate (10 000 targets are about 1 MiB): its file limit plus the same room.
  if (route === '/api/units/[serial]/compensations' && method === 'POST') return PROGRAM_MAX_BYTES + 512 * 1024;
  return DEFAULT_BODY_LIMIT;
}

/** A byte counter that errors the stream once `limit` is passed; `onOver` records it for the answer. */
export function limitedStream(body: ReadableStream<Uint8Array>, limit: number, onOver: () => void): ReadableStream<Uint8Array> {
  let seen = 0;
  return body.pipeThrough(
    new TransformStream<Uint8Array, Uint8Array>({
      transform(chunk, controller) {
        seen += chunk.byteLength;
        if (seen > limit) {
          onOver();
          controller.error(new BodyTooLarge(limit));
          return;
        }
        controller.enqueue(chunk);
      },
    }),
  );
}

/** Read a small body whole, but never more than `limit` bytes of it; undefined when it is larger. */
export async function readCapped(body: ReadableStream<Uint8Array>, limit: number): Promise<Uint8Array | undefined> {
  const reader = body.getReader();
  const chunks: Uint8Array[] = [];
  let total = 0;
  for (;;) {
    const { done, value } = await reader.read();
    if (done) break;
    total += value.byteLength;
    if (total > limit) {
      await reader.cancel().catch(() => undefined);
      return undefined;
    }
    chunks.push(value);
  }
  return Buffer.concat(chunks);
}

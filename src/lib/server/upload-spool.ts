/**
 * The upload spool: an upload's bytes kept while the form is read (in memory, or in a temporary file once
 * they pass a few MB), replayed for a parse that had to wait for the metadata and for the object store.
 */
import { createReadStream, createWriteStream, type WriteStream } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Readable } from 'node:stream';

/** Upload bytes kept in memory before the spool moves to a temporary file. */
const SPOOL_MEMORY_BYTES = 4 * 1024 * 1024;

/** The raw bytes of an upload, in memory while small, in a temporary file above a few MB. */
export class Spool {
  private chunks: Buffer[] = [];
  private dir?: string;
  private path?: string;
  private stream?: WriteStream;
  size = 0;

  async write(chunk: Buffer) {
    this.size += chunk.length;
    if (!this.stream && this.size <= SPOOL_MEMORY_BYTES) {
      // Copy: the multipart reader's buffers are views into its working memory.
      this.chunks.push(Buffer.from(chunk));
      return;
    }
    if (!this.stream) {
      this.dir = await mkdtemp(join(tmpdir(), 'offsetry-upload-'));
      this.path = join(this.dir, 'file');
      this.stream = createWriteStream(this.path);
      for (const c of this.chunks) await this.put(c);
      this.chunks = [];
    }
    await this.put(chunk);
  }

  private put(chunk: Buffer): Promise<void> {
    const stream = this.stream!;
    return new Promise((resolve, reject) => {
      const ok = stream.write(chunk, (err) => (err ? reject(err) : ok && resolve()));
      if (!ok) stream.once('drain', resolve);
    });
  }

  async finish() {
    const stream = this.stream;
    if (stream) await new Promise<void>((resolve, reject) => stream.end((err?: Error | null) => (err ? reject(err) : resolve())));
  }

  /** The bytes again, chunk by chunk (for a parse that had to wait for the unit field). */
  async *read(): AsyncGenerator<Buffer> {
    if (this.path) yield* createReadStream(this.path, { highWaterMark: 1 << 16 }) as AsyncIterable<Buffer>;
    else yield* this.chunks;
  }

  body(): Buffer | Readable {
    return this.path ? createReadStream(this.path) : Buffer.concat(this.chunks);
  }

  async dispose() {
    this.stream?.destroy();
    if (this.dir) await rm(this.dir, { recursive: true, force: true });
  }
}

/** Thrown when a body or a file passes its limit. */
export class TooLarge extends Error {}

/** The request body, refused once it passes `limit` bytes (also when no content-length was sent). */
export async function* capped(body: AsyncIterable<Uint8Array>, limit: number): AsyncGenerator<Uint8Array> {
  let total = 0;
  for await (const chunk of body) {
    total += chunk.byteLength;
    if (total > limit) throw new TooLarge();
    yield chunk;
  }
}

import { describe, expect, it } from 'vitest';
import { multipartBoundary, MultipartError, readMultipart } from '../../src/lib/server/multipart';

/** Encode a FormData the way a browser or undici does (Response serialises it as multipart/form-data). */
async function encode(form: FormData): Promise<{ bytes: Uint8Array; type: string }> {
  const res = new Response(form);
  return { bytes: new Uint8Array(await res.arrayBuffer()), type: res.headers.get('content-type')! };
}

/** Feed bytes in chunks of `size` so boundaries fall across chunk edges. */
async function* chunked(bytes: Uint8Array, size: number) {
  for (let k = 0; k < bytes.length; k += size) yield bytes.subarray(k, k + size);
}

async function collect(bytes: Uint8Array, type: string, size: number) {
  const out: { name: string; filename?: string; contentType?: string; value: Buffer }[] = [];
  for await (const part of readMultipart(chunked(bytes, size), multipartBoundary(type)!)) {
    const parts: Buffer[] = [];
    for await (const c of part.data) parts.push(Buffer.from(c));
    out.push({ name: part.name, filename: part.filename, contentType: part.contentType, value: Buffer.concat(parts) });
  }
  return out;
}

describe('readMultipart', () => {
  const fileBytes = new Uint8Array(70_000).map((_, k) => (k * 7919) % 256); // every byte value, CR/LF included
  it.each([1, 7, 64, 1000, 65536])('reads fields and a binary file split into %i-byte chunks', async (size) => {
    const form = new FormData();
    form.append('unit', 'SN-1');
    form.append('notes', 'line one\r\nline two — ünïcode');
    form.append('file', new Blob([fileBytes], { type: 'text/csv' }), 'session 1.csv');
    form.append('empty', '');
    const { bytes, type } = await encode(form);
    const parts = await collect(bytes, type, size);
    expect(parts.map((p) => p.name)).toEqual(['unit', 'notes', 'file', 'empty']);
    expect(parts[0]!.value.toString()).toBe('SN-1');
    expect(parts[1]!.value.toString()).toBe('line one\r\nline two — ünïcode');
    expect(parts[2]!.filename).toBe('session 1.csv');
    expect(parts[2]!.contentType).toBe('text/csv');
    expect(Buffer.compare(parts[2]!.value, Buffer.from(fileBytes))).toBe(0);
    expect(parts[3]!.value.length).toBe(0);
  });

  it('skips a part the consumer stops reading early', async () => {
    const form = new FormData();
    form.append('file', new Blob([fileBytes]), 'a.bin');
    form.append('after', 'still here');
    const { bytes, type } = await encode(form);
    const names: string[] = [];
    let after = '';
    for await (const part of readMultipart(chunked(bytes, 4096), multipartBoundary(type)!)) {
      names.push(part.name);
      if (part.name === 'file') {
        for await (const _ of part.data) break;
      } else for await (const c of part.data) after += c.toString();
    }
    expect(names).toEqual(['file', 'after']);
    expect(after).toBe('still here');
  });

  it('refuses a body cut off before the closing boundary', async () => {
    const form = new FormData();
    form.append('file', new Blob([fileBytes]), 'a.bin');
    const { bytes, type } = await encode(form);
    await expect(collect(bytes.subarray(0, 50_000), type, 4096)).rejects.toBeInstanceOf(MultipartError);
  });

  it('refuses a form with more parts than the limit instead of reading them all', async () => {
    const form = new FormData();
    for (let k = 0; k < 500; k++) form.append(`f${k}`, 'x');
    const { bytes, type } = await encode(form);
    await expect(collect(bytes, type, 4096)).rejects.toThrow(/more than 100 parts/);
  });

  it('never holds a text field longer than the limit (it arrives cut, one byte over, for the caller to refuse)', async () => {
    const form = new FormData();
    form.append('notes', 'n'.repeat(5 * 1024 * 1024));
    const { bytes, type } = await encode(form);
    const [part] = await collect(bytes, type, 65536);
    expect(part!.value.length).toBe(64 * 1024 + 2);
  });

  it('finds the boundary in quoted and plain content types only for form-data', () => {
    expect(multipartBoundary('multipart/form-data; boundary="ab cd"')).toBe('ab cd');
    expect(multipartBoundary('multipart/form-data; charset=utf-8; boundary=XyZ')).toBe('XyZ');
    expect(multipartBoundary('application/json')).toBeUndefined();
    expect(multipartBoundary('multipart/form-data')).toBeUndefined();
  });
});

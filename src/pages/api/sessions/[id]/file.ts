import type { APIRoute } from 'astro';
import { Readable } from 'node:stream';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { log } from '../../../../lib/server/log';
import { sessionFileStream } from '../../../../lib/server/sessions';

/**
 * The original file, byte for byte as uploaded, streamed from S3. It is the record of what was measured, so
 * it is NOT passed through the CSV writer (no formula neutralisation); the response says so in
 * `x-offsetry-file`. Every CSV Offsetry writes itself goes through src/lib/shared/csv.ts.
 */
export const GET: APIRoute = async ({ params, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such session.');
  let file: Awaited<ReturnType<typeof sessionFileStream>>;
  try {
    file = await sessionFileStream(params.id);
  } catch (e) {
    log('warn', 'session file: S3 read failed', { requestId: locals.requestId, id: params.id, error: String(e) });
    return json({ error: 'The file store (S3) is not reachable right now; try the download again shortly.' }, 503, { 'retry-after': '5' });
  }
  if (!file) return problems(404, 'No such session.');
  // RFC 6266: a plain ASCII fallback plus the UTF-8 name.
  const ascii = file.fileName.replace(/[^\x20-\x7e]|["\\]/g, '_');
  return new Response(Readable.toWeb(file.body) as ReadableStream, {
    status: 200,
    headers: {
      'content-type': 'text/csv; charset=utf-8',
      'content-length': String(file.bytes),
      'content-disposition': `attachment; filename="${ascii}"; filename*=UTF-8''${encodeURIComponent(file.fileName)}`,
      'x-content-sha256': file.sha256,
      'x-offsetry-file': 'original upload, unchanged (not rewritten or neutralised by Offsetry)',
      'cache-control': 'private, no-store',
    },
  });
};

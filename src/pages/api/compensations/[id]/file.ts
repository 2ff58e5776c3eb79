import type { APIRoute } from 'astro';
import { compensationFile } from '../../../../lib/server/compensations';
import { isUuid, json, problems } from '../../../../lib/server/http';
import { log } from '../../../../lib/server/log';

/** `?part=output` (default; the compensated program, written to the export log) or `?part=input` (as uploaded). */
export const GET: APIRoute = async ({ params, url, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such compensation.');
  const part = url.searchParams.get('part') ?? 'output';
  if (part !== 'input' && part !== 'output') return problems(400, 'Invalid part.', [{ field: 'part', message: `"${part}" is not a part`, expected: 'input or output' }]);
  let file: Awaited<ReturnType<typeof compensationFile>>;
  try {
    file = await compensationFile(params.id, part, locals.user!.id);
  } catch (e) {
    log('warn', 'compensation file: read failed', { requestId: locals.requestId, id: params.id, error: String(e) });
    return json({ error: 'The file store (S3) is not reachable right now; try the download again shortly.' }, 503, { 'retry-after': '5' });
  }
  if (file.status === 404) return problems(404, 'No such compensation.');
  if (file.status === 409) return problems(409, 'The compensated program is not ready yet.', [{ field: 'part', message: 'the job has not finished', expected: 'state done' }]);
  const ascii = file.fileName.replace(/[^\x20-\x7e]|["\\]/g, '_');
  return new Response(file.bytes as Uint8Array<ArrayBuffer>, {
    status: 200,
    headers: {
      'content-type': 'text/csv; charset=utf-8',
      'content-disposition': `attachment; filename="${ascii}"; filename*=UTF-8''${encodeURIComponent(file.fileName)}`,
      'x-content-sha256': file.sha256,
      'cache-control': 'private, no-store',
    },
  });
};

import type { APIRoute } from 'astro';
import { certificateDownload } from '../../../../lib/server/certificate';
import { isUuid, problems } from '../../../../lib/server/http';
import { sha256 } from '../../../../lib/server/tokens';

/**
 * The calibration certificate of an approved parameter set (application/pdf), drawn off the request thread;
 * the same bytes every time for the same set. Logged in the export log (format "certificate").
 */
export const GET: APIRoute = async ({ params, locals }) => {
  if (!isUuid(params.id)) return problems(404, 'No such parameter set.');
  const file = await certificateDownload(params.id, locals.user!);
  if (!file) return problems(404, 'No such parameter set.');
  return new Response(file.bytes as Uint8Array<ArrayBuffer>, {
    status: 200,
    headers: {
      'content-type': 'application/pdf',
      'content-disposition': `attachment; filename="${file.fileName.replace(/[^\x20-\x7e]|["\\]/g, '_')}"`,
      'x-content-sha256': sha256(file.bytes),
      'x-certificate-number': file.certificateNo,
      'cache-control': 'private, no-store',
    },
  });
};

import type { APIRoute } from 'astro';
import { warmSessionDigest } from '../../../lib/server/session-checks';
import { json, problems, readJson, zodProblems } from '../../../lib/server/http';
import { completePresignedUpload, completeUploadSchema, isCompletion, startPresignedUpload, startUploadSchema } from '../../../lib/server/presigned-uploads';

/**
 * Presigned session upload, two steps on one route (see src/lib/server/presigned-uploads.ts):
 *   { unit, fileName, bytes, sha256, …metadata }      → 201 { uploadId, url, key, method, headers, expiresAt }
 *   { uploadId, complete: true, …metadata }           → 201 { id, url, poseCount, warnings } like POST /api/sessions
 * Refusals list every problem; 501 { presigned: false } when the server sends uploads through itself only.
 */
export const POST: APIRoute = async ({ locals, request }) => {
  const read = await readJson(request, 64 * 1024);
  if (!read.ok) return read.response;
  const user = { id: locals.user!.id, name: locals.user!.name };
  if (isCompletion(read.value)) {
    const parsed = completeUploadSchema.safeParse(read.value);
    if (!parsed.success) return problems(400, 'The upload cannot be completed: the request is invalid; nothing was stored.', zodProblems(parsed.error));
    const result = await completePresignedUpload(parsed.data, user);
    // The session page's checks are computed now, off the request, so its first view is quick.
    if (result.ok) warmSessionDigest(result.body.id);
    return json(result.body, result.status, result.ok ? { location: result.body.url } : {});
  }
  const parsed = startUploadSchema.safeParse(read.value);
  if (!parsed.success) return problems(400, 'The upload was refused: the request is invalid; nothing was stored.', zodProblems(parsed.error));
  const result = await startPresignedUpload(parsed.data, user);
  return json(result.body, result.status);
};

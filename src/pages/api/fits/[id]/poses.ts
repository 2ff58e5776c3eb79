import type { APIRoute } from 'astro';
import { fitPoseChunks, fitPosePage, fitPosePageSchema } from '../../../../lib/server/fit-poses';
import { isUuid, json, problems, zodProblems } from '../../../../lib/server/http';
import { csvText } from '../../../../lib/shared/csv';

/** Columns of the residuals CSV (one row per pose, file order, full double precision). */
export const FIT_POSE_CSV_HEADER = ['pose', 'line', 'order', 'role', 'before_mm', 'after_mm', 'dx_before_mm', 'dy_before_mm', 'dz_before_mm', 'dx_mm', 'dy_mm', 'dz_mm', 'standardised', 'outlier'];

/**
 * A fit's per-pose residuals, stored apart from the report's summary: ?page=&pageSize= (at most 1000)
 * &order=file|largest as JSON, or ?format=csv for every pose as a streamed CSV file.
 */
export const GET: APIRoute = async ({ params, url }) => {
  if (!isUuid(params.id)) return problems(404, 'No such fit.');
  const query = Object.fromEntries(url.searchParams);
  if (query.format === 'csv') {
    const id = params.id;
    if (!(await fitPosePage(id, { page: 1, pageSize: 1, order: 'file' }))) return problems(404, 'No such fit.');
    const chunks = fitPoseChunks(id);
    const encoder = new TextEncoder();
    let first = true;
    const stream = new ReadableStream<Uint8Array>({
      async pull(controller) {
        if (first) {
          first = false;
          controller.enqueue(encoder.encode(csvText([FIT_POSE_CSV_HEADER])));
        }
        const next = await chunks.next();
        if (next.done) return controller.close();
        const rows = next.value.map((p) => [p.label, p.line, p.order, p.role, p.errorBefore, p.errorAfter, p.before[0], p.before[1], p.before[2], p.after[0], p.after[1], p.after[2], p.standardised, p.outlier ? 'yes' : 'no']);
        controller.enqueue(encoder.encode(csvText(rows)));
      },
      async cancel() {
        await chunks.return(undefined);
      },
    });
    return new Response(stream, {
      headers: { 'content-type': 'text/csv; charset=utf-8', 'content-disposition': `attachment; filename="fit-${id.slice(0, 8)}-residuals.csv"` },
    });
  }
  const parsed = fitPosePageSchema.safeParse(query);
  if (!parsed.success) return problems(400, 'Invalid page.', zodProblems(parsed.error));
  const page = await fitPosePage(params.id, parsed.data);
  if (!page) return problems(404, 'No such fit.');
  return json(page);
};

import type { APIRoute } from 'astro';
import { json } from '../../lib/server/http';
import { openApiDocument } from '../../lib/server/openapi/document';

/** The OpenAPI 3.1 description of this API, generated from the access table and the zod schemas. */
export const GET: APIRoute = async () => json(openApiDocument(), 200, { 'cache-control': 'public, max-age=300' });

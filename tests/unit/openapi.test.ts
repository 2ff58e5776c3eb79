/**
 * The OpenAPI document against the access table and an outside validator (@apidevtools/swagger-parser, which
 * checks the document against the official OpenAPI 3.1 schema and resolves every $ref). Replies of the running
 * app against the document are checked in tests/integration/openapi.test.ts.
 */
import SwaggerParser from '@apidevtools/swagger-parser';
import { describe, expect, it } from 'vitest';
import { buildOpenApiDocument, openApiPath, registryGaps } from '../../src/lib/server/openapi/document';
import { API_ROUTES } from '../../src/lib/shared/routes';

const METHODS = ['get', 'post', 'put', 'patch', 'delete'] as const;
const doc = buildOpenApiDocument();

describe('OpenAPI document', () => {
  it('has a registry entry for every access-table route and method, and none the table lacks', () => {
    // When this fails after adding a route: add its entry to API_DOCS in src/lib/server/openapi/registry.ts.
    expect(registryGaps()).toEqual({ missing: [], extra: [] });
  });

  it('lists exactly the routes and methods of the access table, with the table\'s roles', () => {
    const fromTable = API_ROUTES.flatMap((r) => Object.keys(r.methods).map((m) => `${m.toLowerCase()} ${openApiPath(r.pattern)}`)).sort();
    const fromDoc = Object.entries(doc.paths ?? {}).flatMap(([path, item]) => METHODS.filter((m) => (item as Record<string, unknown>)[m]).map((m) => `${m} ${path}`)).sort();
    expect(fromDoc).toEqual(fromTable);
    for (const r of API_ROUTES) {
      for (const [m, access] of Object.entries(r.methods)) {
        const op = (doc.paths![openApiPath(r.pattern)] as Record<string, any>)[m.toLowerCase()];
        expect(op['x-roles'], `${m} ${r.pattern}`).toEqual(access);
        // Public routes need nothing; every other route takes either way of signing in.
        expect(op.security, `${m} ${r.pattern}`).toEqual(access === 'public' ? [] : [{ bearerToken: [] }, { sessionCookie: [] }]);
        if (access !== 'public') expect(op.responses['401'].content['application/json'].schema.$ref).toBe('#/components/schemas/Problem');
      }
    }
  });

  it('declares both ways to authenticate and the problem format', () => {
    const c = doc.components as any;
    expect(c.securitySchemes.bearerToken).toMatchObject({ type: 'http', scheme: 'bearer' });
    expect(c.securitySchemes.sessionCookie).toMatchObject({ type: 'apiKey', in: 'cookie' });
    expect(c.schemas.Problem.required).toEqual(['error']);
    expect(Object.keys(c.schemas.Problem.properties.errors.items.properties).sort()).toEqual(['column', 'expected', 'field', 'file', 'line', 'message']);
  });

  it('takes request schemas from the zod schemas the endpoints validate with', () => {
    const units = (doc.paths!['/api/units'] as any).post.requestBody.content['application/json'].schema;
    // unitRegisterSchema is strict: unknown fields are refused, and the document says so.
    expect(units.additionalProperties).toBe(false);
    expect(units.required).toContain('serial');
    const list = (doc.paths!['/api/units'] as any).get.parameters.map((p: { name: string; in: string }) => `${p.in}:${p.name}`);
    expect(list).toEqual(expect.arrayContaining(['query:page', 'query:pageSize', 'query:sort']));
    const upload = (doc.paths!['/api/sessions'] as any).post.requestBody.content['multipart/form-data'].schema;
    expect(upload.required).toEqual(expect.arrayContaining(['unit', 'measuredOn', 'file']));
  });

  it('validates as OpenAPI 3.1 with swagger-parser', async () => {
    const api = await SwaggerParser.validate(structuredClone(doc) as never);
    expect((api as { openapi: string }).openapi).toBe('3.1.0');
  });
});

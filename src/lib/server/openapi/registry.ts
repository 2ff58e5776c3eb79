/**
 * The API's description, one entry per route of the access table (src/lib/shared/routes.ts), keyed by the
 * same file-route pattern. The document at GET /api/openapi.json is generated from this registry and the
 * access table (methods and roles come from the table, never from here); request schemas are the zod
 * schemas the endpoints validate with, imported, not copied.
 *
 * Adding a route: add its access-table row, then one entry here:
 *
 *   '/api/things/[id]': {
 *     GET: { tag: 'Things', summary: 'One thing', ok: { schema: R.thing } },
 *     POST: { tag: 'Things', summary: 'Change a thing', body: { schema: thingPatchSchema }, ok: { status: 200, schema: R.thing } },
 *   },
 *
 * `query` takes the endpoint's zod object for the search parameters, `body` the schema of the request body
 * (JSON unless `contentType` says otherwise), `ok` the success reply (JSON with a zod schema from
 * ./responses.ts, or a file with `contentType`). 401/403 (non-public routes), 400 (with a query or body) and
 * 404 (with path parameters) are added to every operation; list further refusals in `refusals`.
 * tests/integration/openapi.test.ts fails for any access-table route or method missing here, and for any
 * entry here that the table does not have.
 */
import { z } from 'zod';
import type { Method } from '../../shared/routes';
import { armGeometrySchema } from '../../engine/geometry';
import { armModelMetaSchema, armModelUpdateMetaSchema } from '../../shared/arm-model-form';
import { frameSchema as compensationFrameSchema } from '../compensations';
import { acknowledgeSchema, tolerancesSchema } from '../drift';
import { batchSchema, exportableQuerySchema, exportableSerialsQuerySchema, logQuerySchema } from '../exports';
import { fitSettingsSchema } from '../fit-settings';
import { fitListQuerySchema, refitSchema } from '../fits';
import { fitPosePageSchema } from '../fit-poses';
import { completeUploadSchema, startUploadSchema } from '../presigned-uploads';
import { fleetQuerySchema } from '../fleet-snapshots';
import { judgementSchema } from '../judgement';
import { decisionSchema, rejectSchema, submitSchema } from '../reviews';
import { sessionMetaSchema } from '../session-form';
import { posePageSchema, sessionCheckQuerySchema, sessionListQuerySchema } from '../sessions';
import { posePlanSchema, unitListQuerySchema, unitRegisterSchema } from '../units';
import { inviteSchema, tokenCreateSchema, userPatchSchema } from '../users';
import { webhookCreateSchema, webhookDeliveryQuerySchema } from '../webhooks';
import { querySchema as alertQuery } from '../../../pages/api/alerts/index';
import { querySchema as geometryQuery } from '../../../pages/api/arm-models/[id]/geometry';
import { querySchema as compareQuery } from '../../../pages/api/units/[serial]/compare';
import { querySchema as driftQuery } from '../../../pages/api/units/[serial]/drift';
import { querySchema as exportQuery } from '../../../pages/api/parameter-sets/[id]/export';
import { body as invitationBody } from '../../../pages/api/invitations/[token]';
import { confirmSchema as signOutEverywhereBody } from '../../../pages/api/me/sign-out-everywhere';
import * as R from './responses';

export interface OperationDoc {
  tag: string;
  summary: string;
  description?: string;
  /** The zod object the endpoint parses its search parameters with. */
  query?: z.ZodObject;
  body?: { schema: z.ZodType; contentType?: string; description?: string };
  ok: { status?: number; schema?: z.ZodType; contentType?: string | string[]; description?: string };
  /** Refusals beyond the ones added to every operation (401/403, 400, 404), e.g. 409, 413, 422. */
  refusals?: Partial<Record<number, string>>;
}

export type RouteDoc = Partial<Record<Method, OperationDoc>>;

/**
 * The compensation upload's form. Its fields are read one by one from the multipart stream
 * (src/lib/server/compensations.ts createCompensation): `frame` with the module's own zod enum, `tool` with
 * the engine's parser, so only `frame` is the schema the endpoint uses; the rest describes what it reads.
 */
const compensationForm = z.object({
  file: z.string().describe('The program CSV (binary part): header `target`, then x,y,z,rx,ry,rz (with optional q1…qn hints) or q1…qn alone.'),
  frame: compensationFrameSchema.optional().describe('Frame of Cartesian targets: base (default) or measurement (needs a base frame in the current set).'),
  tool: z.string().optional().describe('Tool point in the flange frame, "x,y,z[,rx,ry,rz]" (mm, degrees).'),
});

/** GET /api/compensations/{id}/file reads `part` by hand (input or output; default output); this is that rule. */
const compensationFileQuery = z.object({
  part: z.enum(['output', 'input']).default('output').describe('output: the compensated program (logged in the export log); input: the program as uploaded.'),
});

const sessionForm = sessionMetaSchema.extend({
  file: z.string().describe('The session CSV (binary part). Send it after `unit` so it is checked while it arrives.'),
});

export const API_DOCS: Record<string, RouteDoc> = {
  '/api/health': { GET: { tag: 'Service', summary: 'Liveness and readiness', description: '200 when the database, S3, mail and migrations are all up; 503 with the same body otherwise.', ok: { schema: R.health } } },
  '/api/openapi.json': { GET: { tag: 'Service', summary: 'This document (OpenAPI 3.1)', ok: { schema: R.openapiDocument } } },
  '/api/me': { GET: { tag: 'Account', summary: 'The signed-in user (or the token\'s user)', ok: { schema: R.me } } },
  '/api/me/sign-out-everywhere': {
    POST: {
      tag: 'Account',
      summary: 'End every browser session of the caller, on every device (API tokens stay)',
      body: { schema: signOutEverywhereBody },
      ok: { schema: z.object({ ended: z.number().int() }) },
    },
  },
  '/api/invitations/[token]': {
    GET: { tag: 'Account', summary: 'Whether an invitation link is still usable', ok: { schema: R.invitation } },
    POST: { tag: 'Account', summary: 'Set the password once; the link is spent', body: { schema: invitationBody }, ok: { schema: R.invitationAccepted } },
  },
  '/api/tokens': {
    GET: { tag: 'Account', summary: 'Your personal API tokens', ok: { schema: R.tokens } },
    POST: { tag: 'Account', summary: 'Create a personal API token (secret shown once)', description: 'Only with a session: tokens cannot create tokens.', body: { schema: tokenCreateSchema }, ok: { status: 201, schema: R.tokenCreated } },
  },
  '/api/tokens/[id]': { DELETE: { tag: 'Account', summary: 'Revoke one of your tokens', ok: { schema: R.revoked } } },
  '/api/admin/users': {
    GET: { tag: 'Administration', summary: 'Every user', ok: { schema: R.users } },
    POST: { tag: 'Administration', summary: 'Invite a person by e-mail', body: { schema: inviteSchema }, ok: { status: 201, schema: R.oneUser }, refusals: { 409: 'The e-mail address is already known.' } },
  },
  '/api/admin/users/[id]': { PATCH: { tag: 'Administration', summary: 'Change roles, name or active flag', body: { schema: userPatchSchema }, ok: { schema: R.oneUser } } },
  '/api/admin/mail': { GET: { tag: 'Administration', summary: 'Mail outbox (and, in demo, what the capture server received)', ok: { schema: R.mail } } },
  '/api/admin/webhooks': {
    GET: { tag: 'Webhooks', summary: 'Registered webhook endpoints', ok: { schema: R.webhookList } },
    POST: { tag: 'Webhooks', summary: 'Register a webhook endpoint (signing secret shown once)', body: { schema: webhookCreateSchema }, ok: { status: 201, schema: R.webhookCreated } },
  },
  '/api/admin/webhooks/[id]': { DELETE: { tag: 'Webhooks', summary: 'Remove an endpoint: nothing more is sent to it', ok: { schema: R.webhookRemoved } } },
  '/api/admin/webhooks/deliveries': { GET: { tag: 'Webhooks', summary: 'Delivery log, newest first', query: webhookDeliveryQuerySchema, ok: { schema: R.webhookDeliveries } } },
  '/api/arm-models': {
    GET: { tag: 'Arm models', summary: 'Arm models with their latest revision', ok: { schema: R.armModels } },
    POST: {
      tag: 'Arm models',
      summary: 'Create an arm model (revision r1)',
      description: 'The JSON body below, or the raw arm geometry file.',
      body: { schema: armModelMetaSchema.extend({ geometry: armGeometrySchema }) },
      ok: { status: 201, schema: R.armModelChanged },
      refusals: { 409: 'The name is taken.' },
    },
  },
  '/api/arm-models/[id]': {
    GET: { tag: 'Arm models', summary: 'A model with every revision', ok: { schema: R.armModel } },
    PUT: { tag: 'Arm models', summary: 'Change metadata and/or geometry (a used revision becomes the next one)', body: { schema: armModelUpdateMetaSchema }, ok: { schema: R.armModelChanged } },
  },
  '/api/arm-models/[id]/geometry': { GET: { tag: 'Arm models', summary: 'Download a revision\'s arm geometry file', query: geometryQuery, ok: { contentType: 'application/json', schema: R.geometrySchema } } },
  '/api/arm-models/[id]/fleet': {
    GET: {
      tag: 'Fleet and drift',
      summary: 'Fleet statistics over the units\' current sets, from the latest computation: the summary and one page of units, out of line first (202 while the first computation runs)',
      query: fleetQuerySchema,
      ok: { schema: R.fleet },
    },
  },
  '/api/arm-models/[id]/judgement': {
    GET: { tag: 'Fleet and drift', summary: 'Judgement settings: plausible change bounds, instrument noise, tool fixture (defaults until set)', ok: { schema: R.judgement } },
    PUT: { tag: 'Fleet and drift', summary: 'Replace the judgement settings (all four fields)', body: { schema: judgementSchema }, ok: { schema: R.judgement } },
  },
  '/api/arm-models/[id]/tolerances': {
    GET: { tag: 'Fleet and drift', summary: 'Drift tolerances per parameter group', ok: { schema: R.tolerances } },
    PUT: { tag: 'Fleet and drift', summary: 'Replace the drift tolerances', body: { schema: tolerancesSchema }, ok: { schema: R.tolerances } },
  },
  '/api/units': {
    GET: { tag: 'Units', summary: 'Units, paginated and sortable', query: unitListQuerySchema, ok: { schema: R.unitList } },
    POST: { tag: 'Units', summary: 'Register a unit', body: { schema: unitRegisterSchema }, ok: { status: 201, schema: R.unitCreated }, refusals: { 409: 'The serial number is known.' } },
  },
  '/api/units/[serial]': { GET: { tag: 'Units', summary: 'A unit with its model revision, current parameter set and counts', ok: { schema: R.unit } } },
  '/api/units/[serial]/pose-plan': {
    GET: { tag: 'Units', summary: 'A pose plan for the next session (format=csv gives a download)', query: posePlanSchema, ok: { schema: R.posePlan }, refusals: { 422: 'No plan can be made for this geometry.' } },
    POST: { tag: 'Units', summary: 'A pose plan, options as a JSON body', body: { schema: posePlanSchema }, ok: { schema: R.posePlan }, refusals: { 422: 'No plan can be made for this geometry.' } },
  },
  '/api/units/[serial]/parameter-sets': { GET: { tag: 'Parameter sets', summary: 'A unit\'s parameter sets, newest first', ok: { schema: R.parameterSets } } },
  '/api/units/[serial]/compare': { GET: { tag: 'Parameter sets', summary: 'Two geometries of a unit side by side', query: compareQuery, ok: { schema: R.compare } } },
  '/api/units/[serial]/history': { GET: { tag: 'Units', summary: 'Audit entries, sessions, fits and parameter sets of a unit', ok: { schema: R.history } } },
  '/api/units/[serial]/drift': { GET: { tag: 'Fleet and drift', summary: 'Each parameter over the unit\'s approved versions', query: driftQuery, ok: { schema: R.drift } } },
  '/api/sessions': {
    GET: { tag: 'Sessions', summary: 'Sessions, newest measurement first', query: sessionListQuerySchema, ok: { schema: R.sessionList } },
    POST: {
      tag: 'Sessions',
      summary: 'Upload a session file',
      description: 'The whole file is checked; a refusal lists every problem with line, column and field, and nothing is stored.',
      body: { schema: sessionForm, contentType: 'multipart/form-data' },
      ok: { status: 201, schema: R.uploadAccepted },
      refusals: { 409: 'The same file was uploaded for this unit before (`existing` names it).', 413: 'The file is too large.', 415: 'Not multipart/form-data.' },
    },
  },
  '/api/sessions/uploads': {
    POST: {
      tag: 'Sessions',
      summary: 'Presigned upload: start (file facts) or complete (`complete: true`)',
      body: { schema: z.union([startUploadSchema, completeUploadSchema]) },
      ok: { status: 201, schema: z.union([R.presignedStart, R.uploadAccepted]) },
      refusals: { 409: 'The same file was uploaded before.', 501: 'This server takes uploads through itself only.' },
    },
  },
  '/api/sessions/[id]': { GET: { tag: 'Sessions', summary: 'One session\'s metadata', ok: { schema: R.session } } },
  '/api/sessions/[id]/file': { GET: { tag: 'Sessions', summary: 'The original file, byte for byte', ok: { contentType: 'text/csv' } } },
  '/api/sessions/[id]/poses': { GET: { tag: 'Sessions', summary: 'Parsed poses in file order, paginated', query: posePageSchema, ok: { schema: R.poses } } },
  '/api/sessions/[id]/check': { GET: { tag: 'Sessions', summary: 'Nominal-model error over the poses (statistics and verdicts over all, the poses a page at a time, in file order or largest first) and pose-set quality', query: sessionCheckQuerySchema, ok: { schema: R.sessionCheck } } },
  '/api/sessions/[id]/fits': {
    GET: { tag: 'Fits and reviews', summary: 'Fits of one session, newest first', ok: { schema: R.fitList } },
    POST: { tag: 'Fits and reviews', summary: 'Start a fit (202 at once; the job queue runs it)', body: { schema: fitSettingsSchema }, ok: { status: 202, schema: R.fitQueued }, refusals: { 409: 'The session cannot be fitted now.' } },
  },
  '/api/fits': { GET: { tag: 'Fits and reviews', summary: 'Fits, filtered by unit, state and review state', query: fitListQuerySchema, ok: { schema: R.fitList } } },
  '/api/fits/[id]': { GET: { tag: 'Fits and reviews', summary: 'A fit: progress while it runs, then the report summary (per-pose results from /poses)', ok: { schema: R.fit } } },
  '/api/fits/[id]/poses': {
    GET: {
      tag: 'Fits and reviews',
      summary: "A fit's per-pose residuals, page by page (or every pose as CSV with format=csv)",
      // format=csv is read before the page parameters (the endpoint streams the file then).
      query: fitPosePageSchema.extend({ format: z.enum(['csv']).optional().describe('csv: every pose as a streamed CSV file') }),
      ok: {
        contentType: ['application/json', 'text/csv'],
        schema: z.looseObject({ poses: z.array(z.looseObject({ label: z.string(), line: z.number().int(), order: z.number().int(), role: z.string(), errorBefore: z.number(), errorAfter: z.number() })), total: z.number().int(), page: z.number().int(), pageSize: z.number().int(), order: z.enum(['file', 'largest']) }),
      },
    },
  },
  '/api/fits/[id]/submit': {
    POST: {
      tag: 'Fits and reviews',
      summary: 'Submit a fitted fit for review',
      description: 'An implausible fit (see its verdicts) is submitted only with `override`, an engineer\'s written reason (403 for other roles).',
      body: { schema: submitSchema },
      ok: { schema: R.reviewDone },
      refusals: { 409: 'The fit is not in a state that allows this, or it is implausible and no override was given.' },
    },
  },
  '/api/fits/[id]/approve': {
    POST: { tag: 'Fits and reviews', summary: 'Approve: the unit\'s next parameter set version (four-eyes rule)', body: { schema: decisionSchema }, ok: { schema: R.reviewDone }, refusals: { 409: 'The fit is not awaiting review.' } },
  },
  '/api/fits/[id]/reject': { POST: { tag: 'Fits and reviews', summary: 'Return a fit with the reason', body: { schema: rejectSchema }, ok: { schema: R.reviewDone }, refusals: { 409: 'The fit is not awaiting review.' } } },
  '/api/fits/[id]/refit': { POST: { tag: 'Fits and reviews', summary: 'Fit again with changed settings or exclusions', body: { schema: refitSchema }, ok: { status: 202, schema: R.fitQueued } } },
  '/api/alerts': { GET: { tag: 'Fleet and drift', summary: 'Open drift alerts, newest first', query: alertQuery, ok: { schema: R.alerts } } },
  '/api/alerts/[id]/acknowledge': { POST: { tag: 'Fleet and drift', summary: 'Acknowledge a drift alert with a comment', body: { schema: acknowledgeSchema }, ok: { schema: R.acknowledged }, refusals: { 409: 'Already acknowledged.' } } },
  '/api/parameter-sets/[id]/export': {
    GET: { tag: 'Parameter sets', summary: 'Download one file of an approved parameter set (logged)', query: exportQuery, ok: { contentType: ['application/json', 'text/csv', 'application/xml'], description: 'The file by `format`: json (application/json), csv (text/csv), urdf (application/xml); header x-content-sha256.' } },
  },
  '/api/parameter-sets/[id]/certificate': {
    GET: {
      tag: 'Parameter sets',
      summary: 'The calibration certificate of an approved set (PDF, logged)',
      description: 'The same bytes every time for the same set; headers x-content-sha256 and x-certificate-number.',
      ok: { contentType: 'application/pdf' },
    },
  },
  '/api/parameter-sets/[id]/accuracy-map': {
    GET: { tag: 'Parameter sets', summary: 'Before/after accuracy map: predicted |calibrated − nominal| (mm) on three planes', ok: { schema: R.accuracyMap } },
  },
  '/api/units/[serial]/compensations': {
    GET: { tag: 'Compensated programs', summary: 'The unit\'s compensated programs, newest first', ok: { schema: R.compensationList } },
    POST: {
      tag: 'Compensated programs',
      summary: 'Compensate a program for the unit\'s current parameter set (202 at once; a job runs it)',
      description: 'The whole file is checked first; a refusal lists every problem with line, column and field, and nothing is stored.',
      body: { schema: compensationForm, contentType: 'multipart/form-data' },
      ok: { status: 202, schema: R.compensationQueued },
      refusals: { 409: 'The unit has no approved parameter set.', 413: 'The program is too large.', 415: 'Not multipart/form-data.' },
    },
  },
  '/api/compensations': { GET: { tag: 'Compensated programs', summary: 'Every unit\'s compensated programs, newest first (the latest 100)', ok: { schema: R.compensationList } } },
  '/api/compensations/[id]': { GET: { tag: 'Compensated programs', summary: 'One compensation: state, progress, checksums and (when done) statuses and corrections', ok: { schema: R.compensation } } },
  '/api/compensations/[id]/file': {
    GET: {
      tag: 'Compensated programs',
      summary: 'Download the compensated program (logged) or the uploaded one',
      query: compensationFileQuery,
      ok: { contentType: 'text/csv', description: 'The CSV; header x-content-sha256.' },
      refusals: { 409: 'The compensated program is not ready yet.', 503: 'The file store is not reachable right now; try again shortly.' },
    },
  },
  '/api/exports': {
    GET: { tag: 'Parameter sets', summary: 'The export log', query: logQuerySchema, ok: { schema: R.exportLog } },
    POST: { tag: 'Parameter sets', summary: 'A zip of each listed unit\'s current set with manifests (logged)', body: { schema: batchSchema }, ok: { contentType: 'application/zip' } },
  },
  '/api/exports/units': {
    GET: { tag: 'Parameter sets', summary: 'Units with an approved set, a page at a time by serial number (search: serial, site, cell, arm model)', query: exportableQuerySchema, ok: { schema: R.exportableUnits } },
  },
  '/api/exports/units/serials': {
    GET: { tag: 'Parameter sets', summary: 'The serial numbers of every unit with an approved set that a search matches, up to the batch limit', query: exportableSerialsQuerySchema, ok: { schema: R.exportableSerials } },
  },
};

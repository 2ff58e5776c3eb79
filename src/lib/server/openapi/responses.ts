/**
 * Response bodies of the API as zod schemas, for the OpenAPI document only (the endpoints build their replies
 * from typed server functions). Objects are open (`looseObject`): a reply may carry more fields than listed,
 * and every listed field is checked against real replies by tests/integration/openapi.test.ts.
 */
import { z } from 'zod';
import { ROLES } from '../../shared/roles';
import { FIT_STATES, REVIEW_STATES } from '../../../db/schema/fits';
import { COMPENSATION_STATES } from '../../../db/schema/compensations';

const id = z.uuid();
const isoTime = z.string().describe('ISO 8601 date-time');
const day = z.string().regex(/^\d{4}-\d{2}-\d{2}$/).describe('date YYYY-MM-DD');
const nullableTime = isoTime.nullable();

/** The 4xx problem format every refusal uses. */
export const problemSchema = z
  .looseObject({
    error: z.string().describe('What went wrong, in one sentence.'),
    errors: z
      .array(
        z.looseObject({
          file: z.string().optional(),
          line: z.number().int().optional().describe('1-based line of the uploaded file'),
          column: z.string().optional().describe('column name of the uploaded file'),
          field: z.string().optional().describe('dotted path of the request field (query, body or form field)'),
          message: z.string(),
          expected: z.string().optional(),
        }),
      )
      .optional()
      .describe('Every problem found, each naming its line / column / field; absent for refusals without field problems (401, 403, 405).'),
  })
  .meta({ id: 'Problem' });

export const geometrySchema = z
  .looseObject({
    format: z.literal('offsetry-arm/1'),
    name: z.string().optional(),
    convention: z.enum(['dh', 'mdh']),
    joints: z.array(z.looseObject({ name: z.string(), type: z.enum(['revolute', 'prismatic']), a: z.number(), alpha: z.number(), d: z.number(), theta: z.number() })),
  })
  .meta({ id: 'ArmGeometry', description: 'Arm geometry file (offsetry-arm/1): lengths in mm, angles in degrees, full double precision.' });

const page = { total: z.number().int(), page: z.number().int(), pageSize: z.number().int() };

const userSchema = z
  .looseObject({ id, email: z.string(), name: z.string(), roles: z.array(z.enum(ROLES)), active: z.boolean() })
  .meta({ id: 'User' });

export const health = z.looseObject({
  status: z.enum(['ok', 'degraded']),
  mode: z.string(),
  database: z.boolean(),
  s3: z.boolean(),
  mail: z.boolean(),
  migrations: z.looseObject({ applied: z.number().int(), expected: z.number().int(), upToDate: z.boolean() }),
});

export const me = z.looseObject({ user: z.looseObject({ id, email: z.string(), name: z.string(), roles: z.array(z.enum(ROLES)), via: z.enum(['session', 'token']) }) });
export const invitation = z.looseObject({ email: z.string(), name: z.string(), expiresAt: z.string() });
export const invitationAccepted = z.looseObject({ email: z.string() });

const tokenRow = z.looseObject({ id, name: z.string(), prefix: z.string(), createdAt: isoTime, lastUsedAt: nullableTime, revokedAt: nullableTime });
export const tokens = z.looseObject({ tokens: z.array(tokenRow) });
export const tokenCreated = z.looseObject({ id, name: z.string(), prefix: z.string(), token: z.string().describe('The secret, shown once.') });
export const revoked = z.looseObject({ revoked: z.literal(true) });

export const users = z.looseObject({ users: z.array(userSchema) });
export const oneUser = z.looseObject({ user: userSchema });
export const mail = z.looseObject({ outbox: z.array(z.looseObject({ id: z.union([id, z.number()]), state: z.string().optional() })), captured: z.unknown() });

const armModelRow = z.looseObject({ id, name: z.string(), manufacturer: z.string(), latestRevision: z.number().int(), convention: z.enum(['dh', 'mdh']), jointCount: z.number().int(), unitCount: z.number().int(), createdAt: isoTime });
export const armModels = z.looseObject({ items: z.array(armModelRow) });
export const armModel = z.looseObject({ id, name: z.string(), manufacturer: z.string(), revisions: z.array(z.looseObject({ id, revision: z.number().int(), geometry: geometrySchema })) });
export const armModelChanged = z.looseObject({ id, name: z.string() });

const unitRow = z.looseObject({ serial: z.string(), modelId: id, model: z.string(), revision: z.number().int(), site: z.string(), cell: z.string(), commissionedOn: day.nullable(), needsAttention: z.boolean(), createdAt: isoTime });
export const unitList = z.looseObject({ items: z.array(unitRow), ...page });
export const unit = z
  .looseObject({
    id,
    serial: z.string(),
    site: z.string(),
    cell: z.string(),
    needsAttention: z.boolean(),
    model: z.looseObject({ id, name: z.string(), latestRevision: z.number().int() }),
    revision: z.looseObject({ id, revision: z.number().int(), geometry: geometrySchema }),
    currentParameterSet: z.looseObject({ id, version: z.number().int(), approvedAt: isoTime }).nullable(),
    counts: z.looseObject({ sessions: z.number().int(), fits: z.number().int(), parameterSets: z.number().int() }),
  })
  .meta({ id: 'Unit' });
export const unitCreated = z.looseObject({ serial: z.string() });
export const posePlan = z.looseObject({ serial: z.string(), count: z.number().int(), seed: z.number().int(), index: z.enum(['O1', 'O3', 'O4']), joints: z.array(z.string()), csv: z.string() });

const sessionRow = z.looseObject({ id, url: z.string(), unit: z.string(), measuredOn: day, technician: z.string(), instrument: z.string(), fileName: z.string(), poseCount: z.number().int(), createdAt: isoTime });
export const sessionList = z.looseObject({ sessions: z.array(sessionRow), ...page });
export const session = z.looseObject({
  session: z.looseObject({
    id,
    unit: z.looseObject({ id, serial: z.string() }),
    model: z.looseObject({ id, name: z.string(), revision: z.number().int() }),
    measuredOn: day,
    instrument: z.string(),
    instrumentUncertainty: z.string().meta({ description: "The instrument's stated uncertainty as its certificate gives it; empty when not recorded" }),
    fileName: z.string(),
    fileSha256: z.string().regex(/^[0-9a-f]{64}$/),
    fileBytes: z.number().int(),
    poseCount: z.number().int(),
    jointCount: z.number().int(),
    warnings: z.array(z.looseObject({ message: z.string() })),
  }),
});
export const uploadAccepted = z
  .looseObject({ id, url: z.string(), poseCount: z.number().int(), warnings: z.array(z.looseObject({ message: z.string() })) })
  .meta({ id: 'SessionAccepted' });
export const presignedStart = z.looseObject({ uploadId: z.string(), url: z.string(), method: z.string(), headers: z.record(z.string(), z.string()), expiresAt: z.string() });
export const poses = z.looseObject({
  poses: z.array(z.looseObject({ idx: z.number().int(), line: z.number().int(), label: z.string(), q: z.array(z.number()), x: z.number(), y: z.number(), z: z.number(), split: z.enum(['fit', 'validate']).nullable() })),
  ...page,
});
export const sessionCheck = z.looseObject({
  check: z.looseObject({ stats: z.looseObject({ n: z.number().int(), rms: z.number(), mean: z.number(), max: z.number(), p95: z.number() }), registered: z.boolean(), poses: z.array(z.looseObject({ label: z.string(), line: z.number().int(), error: z.number() })), posePage: z.looseObject({ page: z.number().int(), pageSize: z.number().int(), total: z.number().int(), order: z.enum(['file', 'largest']) }) }),
  quality: z.looseObject({ poseCount: z.number().int(), poor: z.boolean() }),
});

const fitSummary = z
  .looseObject({
    id,
    sessionId: id,
    unitId: id,
    unitSerial: z.string(),
    state: z.enum(FIT_STATES),
    reviewState: z.enum(REVIEW_STATES).nullable(),
    progress: z.looseObject({ iteration: z.number().int(), rmsMm: z.number() }).nullable(),
    error: z.string().nullable(),
    attempts: z.number().int(),
    createdAt: isoTime,
  })
  .meta({ id: 'FitSummary' });
export const fitList = z.looseObject({ items: z.array(fitSummary), ...page });
const verdictLevel = z.enum(['pass', 'caution', 'implausible']);
const judgementSettings = z
  .looseObject({ lengthBoundMm: z.number(), angleBoundDeg: z.number(), instrumentNoiseMm: z.number(), toolFixture: z.boolean() })
  .meta({ id: 'JudgementSettings', description: 'Plausible change bounds (mm, degrees), instrument noise (mm, 1σ per coordinate) and whether the tool is a fixed fixture.' });
const verdicts = z
  .looseObject({
    level: verdictLevel.describe('The worst verdict.'),
    verdicts: z.array(
      z.looseObject({
        rule: z.enum(['nominal-error', 'joint-readings', 'parameter-changes', 'residual-noise']),
        level: verdictLevel,
        title: z.string(),
        reason: z.string().describe('Plain words: what was measured, against what, and what it likely means.'),
        measured: z.number().optional(),
        limit: z.number().optional(),
      }),
    ),
    settings: judgementSettings,
    rules: z.array(z.string()).describe('The rule of each check in one sentence.'),
  })
  .meta({ id: 'Verdicts' });
export const fit = z.looseObject({
  fit: z.looseObject({
    id,
    state: z.enum(FIT_STATES),
    report: z.record(z.string(), z.unknown()).nullable(),
    verdicts: verdicts.nullable().describe('The plausibility verdicts, once fitted.'),
    submitNote: z.string().nullable(),
    overrideNote: z.string().nullable().describe('The engineer\'s written override of an implausible verdict.'),
    overrideByName: z.string().nullable(),
    overrideAt: nullableTime,
    exclusionNote: z.string().nullable().describe('Why poses were excluded in a refit.'),
    parameterSet: z.looseObject({ id, version: z.number().int(), state: z.string() }).nullable(),
  }),
});
export const fitQueued = z.looseObject({ id, state: z.literal('queued'), href: z.string() });
export const reviewDone = z.looseObject({ ok: z.literal(true) });

const parameterSetRow = z.looseObject({ id, version: z.number().int(), state: z.enum(['current', 'superseded']), fitId: id, approvedAt: isoTime, geometry: geometrySchema, standardErrors: z.record(z.string(), z.number().nullable()) });
export const parameterSets = z.looseObject({ unit: z.looseObject({ id, serial: z.string() }), parameterSets: z.array(parameterSetRow) });
export const compare = z.looseObject({ ok: z.literal(true), a: z.looseObject({}), b: z.looseObject({}), parameters: z.array(z.looseObject({})) });
export const history = z.looseObject({
  serial: z.string(),
  audit: z.array(z.looseObject({ id: z.union([id, z.number()]), at: isoTime, action: z.string() })),
  sessions: z.array(z.looseObject({ id, measuredOn: day })),
  fits: z.array(z.looseObject({ id, state: z.string(), createdAt: isoTime })),
  parameterSets: z.array(z.looseObject({ id, version: z.number().int(), state: z.string(), approvedAt: isoTime })),
});

export const fleet = z.looseObject({
  model: z.looseObject({}),
  statistics: z.looseObject({ alpha: z.number(), rule: z.string(), judgedParameters: z.number().int(), criticalScore: z.number().nullable(), toolFixture: z.boolean() }),
  unitCount: z.number().int(),
  flaggedUnits: z.array(z.string()),
  units: z.array(
    z.looseObject({
      unitId: id,
      serial: z.string(),
      setId: id,
      version: z.number().int(),
      approvedAt: isoTime,
      deviations: z.record(z.string(), z.number()),
      criticalScore: z.number(),
      flagged: z.boolean(),
      outside: z.array(z.string()).describe('Parameter keys outside the fleet\'s limits.'),
    }),
  ),
  parameters: z.array(z.looseObject({ key: z.string(), unit: z.enum(['mm', 'deg']), n: z.number().int(), judged: z.boolean(), outside: z.array(z.string()) })),
  outside: z.array(z.looseObject({ serial: z.string(), key: z.string(), deviation: z.number(), lower: z.number(), upper: z.number() })).describe('Out-of-line values of the units on this page.'),
  outsideCount: z.number().int().describe('Out-of-line values in the whole fleet.'),
  unitsPage: z.looseObject({ page: z.number().int(), pageSize: z.number().int(), total: z.number().int() }),
  snapshot: z.looseObject({
    computedAt: isoTime,
    durationMs: z.number().int(),
    pending: z.boolean().describe('The current sets or judgement settings changed since: a newer computation is queued or running.'),
    rule: z.string(),
  }),
});
export const judgement = z.looseObject({
  modelId: id,
  settings: judgementSettings,
  defaults: z.boolean().describe('True while the model uses the defaults (nothing stored).'),
  defaultSettings: judgementSettings,
});
const groupTolerances = z.record(z.string(), z.number().nullable());
export const tolerances = z.looseObject({ modelId: id, modelName: z.string(), tolerances: groupTolerances, defaults: z.boolean() });
export const drift = z.looseObject({
  unit: z.looseObject({ id, serial: z.string(), needsAttention: z.boolean() }),
  tolerances: groupTolerances,
  versions: z.array(z.looseObject({ id, version: z.number().int(), state: z.string(), approvedAt: isoTime })),
  parameters: z.array(z.looseObject({ key: z.string(), unit: z.enum(['mm', 'deg']), points: z.array(z.looseObject({ kind: z.enum(['set', 'fit']), value: z.number() })) })),
  alerts: z.array(z.looseObject({ id, createdAt: z.string() })),
});
const alertRow = z.looseObject({ id, unitId: id, serial: z.string(), modelId: id, modelName: z.string(), parameterSetId: id, version: z.number().int(), createdAt: z.string(), acknowledgedAt: z.string().nullable() }).meta({ id: 'DriftAlert' });
export const alerts = z.looseObject({ alerts: z.array(alertRow) });
export const acknowledged = z.looseObject({ ok: z.literal(true), alert: alertRow, unitNeedsAttention: z.boolean() });
export const exportableUnits = z.looseObject({
  q: z.string(),
  items: z.array(z.looseObject({ serial: z.string(), site: z.string(), needsAttention: z.boolean(), modelName: z.string(), setId: id, version: z.number().int(), approvedAt: isoTime })),
  totalIsLowerBound: z.boolean(),
  ...page,
});
export const exportableSerials = z.looseObject({ q: z.string(), limit: z.number().int(), more: z.boolean(), serials: z.array(z.string()) });
export const exportLog = z.looseObject({ entries: z.array(z.looseObject({ id: z.union([id, z.number()]), at: isoTime, kind: z.string(), userName: z.string() })), ...page });

const accuracyPlane = z.looseObject({
  axes: z.enum(['xy', 'xz', 'yz']),
  fixed: z.looseObject({ axis: z.enum(['x', 'y', 'z']), at: z.number(), halfThickness: z.number() }),
  u: z.array(z.number()).describe('Cell edges along the first axis (mm).'),
  v: z.array(z.number()).describe('Cell edges along the second axis (mm).'),
  cells: z.array(z.array(z.number().nullable())).describe('Mean |calibrated − nominal| (mm) per cell, row-major [iv][iu]; null where no sample lands.'),
  samples: z.number().int(),
});
export const accuracyMap = z.looseObject({
  parameterSetId: id,
  version: z.number().int(),
  planes: z.array(accuracyPlane),
  scaleMaxMm: z.number(),
  meanMm: z.number(),
  maxMm: z.number(),
  samples: z.number().int(),
  seed: z.number().int(),
  cellsPerSide: z.number().int(),
});

const frameSpec = z.looseObject({ x: z.number(), y: z.number(), z: z.number(), rx: z.number(), ry: z.number(), rz: z.number() });
const sha = z.string().regex(/^[0-9a-f]{64}$/);
const compensationFields = z.looseObject({
    id,
    serial: z.string(),
    parameterSetId: id,
    parameterSetVersion: z.number().int(),
    state: z.enum(COMPENSATION_STATES),
    frame: z.enum(['base', 'measurement']),
    tool: frameSpec.nullable().describe('Tool point in the flange frame (mm, degrees), if one was given.'),
    targetCount: z.number().int(),
    input: z.looseObject({ name: z.string(), sha256: sha, bytes: z.number().int() }),
    output: z.looseObject({ sha256: sha, bytes: z.number().int() }).nullable().describe('The compensated program, once done.'),
    progress: z.looseObject({ done: z.number().int(), total: z.number().int() }).nullable(),
    error: z.string().nullable(),
    createdBy: z.string(),
    createdAt: isoTime,
    finishedAt: nullableTime,
});
const compensationRow = compensationFields.meta({ id: 'Compensation' });
const ikStatus = z.enum(['reached', 'unreachable', 'outside-limits', 'singular', 'jump']);
export const compensationList = z.looseObject({ compensations: z.array(compensationRow) });
export const compensation = compensationFields.extend({
  summary: z
    .looseObject({
      kind: z.enum(['cartesian', 'joint']),
      counts: z.record(ikStatus, z.number().int()),
      maxCorrectionMm: z.number(),
      rmsCorrectionMm: z.number(),
      histogram: z.looseObject({ edges: z.array(z.number()), counts: z.array(z.number().int()) }),
      largest: z.array(z.looseObject({ target: z.string(), line: z.number().int(), correctionMm: z.number(), rotationDeg: z.number(), status: ikStatus })),
      notReached: z.array(z.looseObject({ target: z.string(), line: z.number().int(), status: ikStatus, message: z.string() })),
      milliseconds: z.number(),
    })
    .nullable()
    .describe('Statuses and corrections, once done.'),
}).meta({ id: 'CompensationDetail' });
export const compensationQueued = z.looseObject({ id, url: z.string().describe('The page of the compensation; its state is at GET /api/compensations/{id}.') });

export const webhookEndpoint = z
  .looseObject({ id, url: z.string(), events: z.array(z.string()), description: z.string(), active: z.boolean(), createdAt: isoTime, removedAt: nullableTime })
  .meta({ id: 'WebhookEndpoint' });
export const webhookList = z.looseObject({ endpoints: z.array(webhookEndpoint) });
export const webhookCreated = z.looseObject({ endpoint: webhookEndpoint, secret: z.string().describe('The signing secret, shown once.') });
export const webhookRemoved = z.looseObject({ removed: z.literal(true) });
export const webhookDeliveries = z.looseObject({
  deliveries: z.array(
    z.looseObject({
      id,
      endpointId: id,
      url: z.string(),
      event: z.string(),
      state: z.enum(['pending', 'delivered', 'failed']),
      attempts: z.number().int(),
      lastStatus: z.number().int().nullable(),
      lastError: z.string().nullable(),
      createdAt: isoTime,
      deliveredAt: nullableTime,
    }),
  ),
  ...page,
});

export const openapiDocument = z.looseObject({ openapi: z.string().regex(/^3\.1\./), info: z.looseObject({ title: z.string() }), paths: z.record(z.string(), z.unknown()) });

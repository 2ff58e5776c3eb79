import { z } from 'zod';

/**
 * Server configuration, read from the environment and checked once. Server-only: islands never import
 * this (it reads secrets). Scripts and job workers use the same module.
 */
const bool = z
  .enum(['true', 'false', '1', '0', 'yes', 'no'])
  .transform((v) => v === 'true' || v === '1' || v === 'yes');

const schema = z.object({
  OFFSETRY_MODE: z.enum(['demo', 'production']).default('demo'),
  DATABASE_URL: z.string().regex(/^postgres(ql)?:\/\/\S+$/, 'must be a postgres:// URL'),
  S3_ENDPOINT: z.url().optional(),
  S3_REGION: z.string().min(1).default('us-east-1'),
  S3_BUCKET: z.string().min(3),
  S3_ACCESS_KEY_ID: z.string().min(1),
  S3_SECRET_ACCESS_KEY: z.string().min(1),
  S3_FORCE_PATH_STYLE: bool.default(true),
  SMTP_HOST: z.string().min(1),
  SMTP_PORT: z.coerce.number({ error: 'must be a port number (1–65535)' }).int().min(1).max(65535),
  SMTP_SECURE: bool.default(false),
  SMTP_USER: z.string().optional(),
  SMTP_PASS: z.string().optional(),
  MAIL_FROM: z.string().min(3).default('Offsetry <no-reply@offsetry.local>'),
  MAIL_FAKE_API_URL: z.url().optional(),
  AUTH_SECRET: z.string().min(32, 'must be at least 32 characters (generate one with openssl rand -base64 33)'),
  PUBLIC_BASE_URL: z.url().default('http://127.0.0.1:4321'),
  DEMO_PASSWORD: z.string().min(8).default('offsetry-demo'),
  /** Largest session file accepted, bytes. */
  MAX_UPLOAD_BYTES: z.coerce.number().int().positive().default(50 * 1024 * 1024),
  /** Four-eyes rule: the person who ran a fit cannot approve it (admins excepted). */
  FOUR_EYES: bool.default(true),
  /** Behind our own load balancer: trust its X-Forwarded-For for the client address. */
  TRUST_PROXY: bool.default(false),
  /** Run the fit job worker inside the app process (true) or only in separate worker processes. */
  RUN_WORKER: bool.default(true),
});

export type Config = z.infer<typeof schema>;

/** The secret shipped in examples; production refuses it. */
export const EXAMPLE_SECRET = 'change-me-change-me-change-me-change-me';

let cached: Config | undefined;

export function configProblems(env: NodeJS.ProcessEnv = process.env): string[] {
  const given = stripEmpty(env);
  const parsed = schema.safeParse(given);
  // A variable that is not set at all says so, rather than zod's "expected string, received undefined".
  const problems = parsed.success
    ? []
    : parsed.error.issues.map((i) => {
        const name = i.path.join('.') || '(environment)';
        return `${name}: ${i.path.length === 1 && given[name] === undefined ? 'is not set' : i.message}`;
      });
  // Checked on the raw values too, so the list is complete even when other variables are wrong.
  if (given.OFFSETRY_MODE === 'production' && given.AUTH_SECRET === EXAMPLE_SECRET) {
    problems.push('AUTH_SECRET: the example secret is refused in production mode; generate your own');
  }
  return problems;
}

export function config(): Config {
  if (cached) return cached;
  const problems = configProblems();
  if (problems.length) {
    throw new Error(`Offsetry configuration is incomplete:\n  ${problems.join('\n  ')}`);
  }
  cached = schema.parse(stripEmpty(process.env));
  return cached;
}

/** Empty strings in .env files mean "not set". */
function stripEmpty(env: NodeJS.ProcessEnv): Record<string, string> {
  return Object.fromEntries(Object.entries(env).filter((e): e is [string, string] => typeof e[1] === 'string' && e[1] !== ''));
}

export const isProduction = () => config().OFFSETRY_MODE === 'production';

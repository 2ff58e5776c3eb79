import { and, asc, count, eq, gt, isNull, sql } from 'drizzle-orm';
import { z } from 'zod';
import { apiTokens, invitations, loginAttempts, userSessions, users } from '../../db/schema';
import { cleanText } from '../shared/input';
import { ROLES, type Role } from '../shared/roles';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { composeMail, enqueueMail } from './mail';
import { hashPassword, passwordProblem, verifyPassword } from './passwords';
import { newToken, sha256 } from './tokens';

export interface CurrentUser {
  id: string;
  email: string;
  name: string;
  roles: Role[];
  via: 'session' | 'token';
}

const publicUser = (u: typeof users.$inferSelect) => ({
  id: u.id,
  email: u.email,
  name: u.name,
  roles: u.roles,
  active: u.active,
  isDemo: u.isDemo,
  hasPassword: u.passwordHash !== null,
  createdAt: u.createdAt,
});
export type PublicUser = ReturnType<typeof publicUser>;

export const normaliseEmail = (e: string) => e.trim().toLowerCase();

/**
 * The two lookups every request makes (session user, bearer token), prepared once per database handle: the
 * query is built once and PostgreSQL keeps its plan. Only the columns the checks need are read.
 */
const preparedByDb = new WeakMap<Db, ReturnType<typeof prepare>>();
function prepare(database: Db) {
  const person = { id: users.id, email: users.email, name: users.name, roles: users.roles, active: users.active, isDemo: users.isDemo };
  return {
    sessionUser: database
      .select(person)
      .from(userSessions)
      .innerJoin(users, eq(users.id, userSessions.userId))
      .where(and(eq(userSessions.id, sql.placeholder('sid')), eq(userSessions.userId, sql.placeholder('id')), isNull(userSessions.endedAt)))
      .prepare('offsetry_session_user'),
    tokenUser: database
      .select({ t: { id: apiTokens.id, lastUsedAt: apiTokens.lastUsedAt }, u: person })
      .from(apiTokens)
      .innerJoin(users, eq(users.id, apiTokens.userId))
      .where(and(eq(apiTokens.tokenHash, sql.placeholder('hash')), isNull(apiTokens.revokedAt)))
      .prepare('offsetry_token_user'),
  };
}
function prepared(database: Db) {
  let p = preparedByDb.get(database);
  if (!p) preparedByDb.set(database, (p = prepare(database)));
  return p;
}

/**
 * The user behind a browser session, re-read on every request so deactivation and role changes act at once:
 * the session row named in the cookie must exist, belong to that user and not have been ended.
 */
export async function activeUserBySession(id: string, sid: string, database: Db = sharedDb()): Promise<CurrentUser | undefined> {
  if (!z.uuid().safeParse(id).success || !z.uuid().safeParse(sid).success) return undefined;
  const [u] = await prepared(database).sessionUser.execute({ id, sid });
  if (!u || !u.active) return undefined;
  if (u.isDemo && config().OFFSETRY_MODE === 'production') return undefined;
  return { id: u.id, email: u.email, name: u.name, roles: u.roles, via: 'session' };
}

/** A new server-side session row for a sign-in; its id goes into the cookie. */
export async function startSession(userId: string, database: Db = sharedDb()): Promise<string> {
  const [row] = await database.insert(userSessions).values({ userId }).returning({ id: userSessions.id });
  return row!.id;
}

/** End one session (sign-out). Returns whether a live session was ended. */
export async function endSession(sid: string, because = 'sign-out', database: Db = sharedDb()): Promise<boolean> {
  if (!z.uuid().safeParse(sid).success) return false;
  const rows = await database
    .update(userSessions)
    .set({ endedAt: sql`now()`, endedBecause: because })
    .where(and(eq(userSessions.id, sid), isNull(userSessions.endedAt)))
    .returning({ id: userSessions.id });
  return rows.length > 0;
}

/** End every live session of a person (sign out everywhere, deactivation, role change, new password). */
export async function endAllSessions(userId: string, because: string, database: Db | Parameters<Parameters<Db['transaction']>[0]>[0] = sharedDb()): Promise<number> {
  const rows = await database
    .update(userSessions)
    .set({ endedAt: sql`now()`, endedBecause: because })
    .where(and(eq(userSessions.userId, userId), isNull(userSessions.endedAt)))
    .returning({ id: userSessions.id });
  return rows.length;
}

let dummy: Promise<string> | undefined;
/** A hash of a random password with the same parameters as real ones, made once per process. */
const dummyHash = () => (dummy ??= hashPassword(newToken('dummy').token));

// Rate limits for sign-in: per address and per client, over a sliding window (common practice: a handful of
// failures per account, more per client to allow a shared workshop network).
export const LOGIN_WINDOW_MINUTES = 15;
export const LOGIN_MAX_FAILURES_PER_EMAIL = 5;
export const LOGIN_MAX_FAILURES_PER_IP = 30;

export async function loginBlocked(email: string, ip: string, database: Db = sharedDb()): Promise<boolean> {
  const since = sql`now() - make_interval(mins => ${LOGIN_WINDOW_MINUTES})`;
  const [byEmail] = await database
    .select({ n: count() })
    .from(loginAttempts)
    .where(and(eq(loginAttempts.email, email), eq(loginAttempts.success, false), gt(loginAttempts.at, since)));
  const [byIp] = await database
    .select({ n: count() })
    .from(loginAttempts)
    .where(and(eq(loginAttempts.ip, ip), eq(loginAttempts.success, false), gt(loginAttempts.at, since)));
  return (byEmail?.n ?? 0) >= LOGIN_MAX_FAILURES_PER_EMAIL || (byIp?.n ?? 0) >= LOGIN_MAX_FAILURES_PER_IP;
}

/** Check a sign-in; records the attempt. Returns the user or a reason. */
export async function authenticate(
  emailRaw: string,
  password: string,
  ip: string,
  database: Db = sharedDb(),
): Promise<{ ok: true; user: CurrentUser } | { ok: false; reason: 'rate-limited' | 'invalid' }> {
  const email = normaliseEmail(emailRaw);
  if (await loginBlocked(email, ip, database)) return { ok: false, reason: 'rate-limited' };
  const [u] = await database.select().from(users).where(eq(users.email, email));
  const refusedDemo = u?.isDemo && config().OFFSETRY_MODE === 'production';
  // The password is hashed whether or not the account exists, is active or has a password yet, so the time
  // a refusal takes does not tell which accounts exist.
  const matches = await verifyPassword(password, u?.passwordHash ?? (await dummyHash()));
  const good = !!u && !!u.passwordHash && u.active && !refusedDemo && matches;
  await database.insert(loginAttempts).values({ email, ip, success: good });
  if (!good || !u) return { ok: false, reason: 'invalid' };
  return { ok: true, user: { id: u.id, email: u.email, name: u.name, roles: u.roles, via: 'session' } };
}

export async function listUsers(database: Db = sharedDb()) {
  return (await database.select().from(users).orderBy(asc(users.email))).map(publicUser);
}

export const inviteSchema = z.object({
  email: z.email().max(200),
  name: z.string().trim().overwrite((s) => cleanText(s)).min(1, 'name must not be empty').max(200),
  roles: z.array(z.enum(ROLES)).min(1, 'choose at least one role'),
});

export const INVITATION_DAYS = 7;

/**
 * Invite a person: creates the (password-less) user and a one-time link, queues the e-mail in the same
 * transaction. Returns the link too (shown to the admin once, useful when mail is slow).
 */
export async function inviteUser(input: z.infer<typeof inviteSchema>, invitedBy: string, database: Db = sharedDb()) {
  const email = normaliseEmail(input.email);
  const { token, hash } = newToken('inv');
  const url = `${config().PUBLIC_BASE_URL}/invite/${token}`;
  return database.transaction(async (tx) => {
    const [existing] = await tx.select().from(users).where(eq(users.email, email));
    if (existing?.passwordHash) return { ok: false as const, error: `${email} already has an account.` };
    const user =
      existing ??
      (await tx.insert(users).values({ email, name: input.name, roles: input.roles, active: true }).returning())[0]!;
    if (existing) await tx.update(users).set({ roles: input.roles, name: input.name, updatedAt: sql`now()` }).where(eq(users.id, existing.id));
    // A new invitation replaces any earlier unused one.
    await tx.update(invitations).set({ usedAt: sql`now()` }).where(and(eq(invitations.userId, user.id), isNull(invitations.usedAt)));
    await tx.insert(invitations).values({
      userId: user.id,
      tokenHash: hash,
      invitedBy,
      expiresAt: sql`now() + make_interval(days => ${INVITATION_DAYS})`,
    });
    await enqueueMail(
      tx,
      composeMail(
        email,
        'You are invited to Offsetry',
        [
          `Hello ${input.name},`,
          'An administrator has given you an Offsetry account. Choose your password with the link below; it works once and expires in ' +
            `${INVITATION_DAYS} days.`,
        ],
        { label: 'Set your password', url },
      ),
    );
    return { ok: true as const, user: publicUser(user), url };
  });
}

/** The invitation behind a token, if it is still usable. */
export async function findInvitation(token: string, database: Db = sharedDb()) {
  const [row] = await database
    .select({ inv: invitations, user: users })
    .from(invitations)
    .innerJoin(users, eq(users.id, invitations.userId))
    .where(and(eq(invitations.tokenHash, sha256(token)), isNull(invitations.usedAt), gt(invitations.expiresAt, sql`now()`)));
  return row;
}

export async function acceptInvitation(token: string, password: string, database: Db = sharedDb()) {
  const problem = passwordProblem(password);
  if (problem) return { ok: false as const, status: 400, error: problem };
  const hash = await hashPassword(password);
  return database.transaction(async (tx) => {
    // Claim the token atomically: a second use finds no row.
    const [inv] = await tx
      .update(invitations)
      .set({ usedAt: sql`now()` })
      .where(and(eq(invitations.tokenHash, sha256(token)), isNull(invitations.usedAt), gt(invitations.expiresAt, sql`now()`)))
      .returning();
    if (!inv) return { ok: false as const, status: 404, error: 'This link has been used or has expired. Ask an administrator for a new invitation.' };
    const [u] = await tx.update(users).set({ passwordHash: hash, updatedAt: sql`now()` }).where(eq(users.id, inv.userId)).returning();
    await endAllSessions(inv.userId, 'password', tx);
    return { ok: true as const, email: u!.email };
  });
}

export const userPatchSchema = z
  .object({
    roles: z.array(z.enum(ROLES)).min(1, 'a user needs at least one role').optional(),
    active: z.boolean().optional(),
    name: z.string().trim().overwrite((s) => cleanText(s)).min(1, 'name must not be empty').max(200).optional(),
  })
  .refine((v) => Object.keys(v).length > 0, 'nothing to change');

export async function updateUser(id: string, patch: z.infer<typeof userPatchSchema>, actorId: string, database: Db = sharedDb()) {
  if (id === actorId && (patch.active === false || (patch.roles && !patch.roles.includes('admin')))) {
    return { ok: false as const, status: 400, error: 'You cannot deactivate yourself or remove your own admin role.' };
  }
  const [u] = await database
    .update(users)
    .set({ ...patch, updatedAt: sql`now()` })
    .where(eq(users.id, id))
    .returning();
  if (!u) return { ok: false as const, status: 404, error: 'No such user.' };
  // Sessions signed in under the old roles or before a deactivation end for good (a reactivated person signs in again).
  if (patch.active === false) await endAllSessions(id, 'deactivated', database);
  else if (patch.roles) await endAllSessions(id, 'roles', database);
  if (patch.active === false) {
    // A deactivated person's automation stops too.
    await database.update(apiTokens).set({ revokedAt: sql`now()` }).where(and(eq(apiTokens.userId, id), isNull(apiTokens.revokedAt)));
  }
  return { ok: true as const, user: publicUser(u) };
}

/** Upsert a user with a known password (demo seed and tests only). */
export async function upsertUserWithPassword(
  input: { email: string; name: string; roles: Role[]; password: string; isDemo?: boolean },
  database: Db = sharedDb(),
) {
  const email = normaliseEmail(input.email);
  const passwordHash = await hashPassword(input.password);
  const [u] = await database
    .insert(users)
    .values({ email, name: input.name, roles: input.roles, passwordHash, isDemo: input.isDemo ?? false, active: true })
    .onConflictDoUpdate({ target: users.email, set: { name: input.name, roles: input.roles, passwordHash, isDemo: input.isDemo ?? false, active: true } })
    .returning();
  return u!;
}

// ---------- API tokens ----------

export const tokenCreateSchema = z.object({ name: z.string().trim().overwrite((s) => cleanText(s)).min(1, 'name must not be empty').max(100) });

export async function createApiToken(userId: string, name: string, database: Db = sharedDb()) {
  const { token, hash } = newToken('ofs');
  const [row] = await database.insert(apiTokens).values({ userId, name, tokenHash: hash, prefix: token.slice(0, 10) }).returning();
  return { token, id: row!.id, name: row!.name, prefix: row!.prefix, createdAt: row!.createdAt };
}

export async function listApiTokens(userId: string, database: Db = sharedDb()) {
  return database
    .select({ id: apiTokens.id, name: apiTokens.name, prefix: apiTokens.prefix, createdAt: apiTokens.createdAt, lastUsedAt: apiTokens.lastUsedAt, revokedAt: apiTokens.revokedAt })
    .from(apiTokens)
    .where(eq(apiTokens.userId, userId))
    .orderBy(asc(apiTokens.createdAt));
}

export async function revokeApiToken(userId: string, id: string, database: Db = sharedDb()) {
  if (!z.uuid().safeParse(id).success) return false;
  const rows = await database
    .update(apiTokens)
    .set({ revokedAt: sql`now()` })
    .where(and(eq(apiTokens.id, id), eq(apiTokens.userId, userId), isNull(apiTokens.revokedAt)))
    .returning();
  return rows.length > 0;
}

/** The active user behind a bearer token, or undefined for unknown / revoked tokens and inactive users. */
export async function userByBearer(token: string, database: Db = sharedDb()): Promise<CurrentUser | undefined> {
  const [row] = await prepared(database).tokenUser.execute({ hash: sha256(token) });
  if (!row || !row.u.active) return undefined;
  if (row.u.isDemo && config().OFFSETRY_MODE === 'production') return undefined;
  // Record use at most once a minute, so a busy script costs one read per request, not a write too.
  if (!row.t.lastUsedAt || Date.now() - row.t.lastUsedAt.getTime() > 60_000) {
    await database
      .update(apiTokens)
      .set({ lastUsedAt: sql`now()` })
      .where(and(eq(apiTokens.id, row.t.id), sql`(${apiTokens.lastUsedAt} is null or ${apiTokens.lastUsedAt} < now() - interval '1 minute')`));
  }
  return { id: row.u.id, email: row.u.email, name: row.u.name, roles: row.u.roles, via: 'token' };
}

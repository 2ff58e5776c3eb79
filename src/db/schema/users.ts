import { boolean, index, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import { createdAt, id } from './columns';

/** Roles a person can hold; a user may hold several. */
export const ROLES = ['technician', 'engineer', 'quality', 'service', 'admin'] as const;
export type Role = (typeof ROLES)[number];

export const users = pgTable('users', {
  id: id(),
  /** Stored lower-case; unique. */
  email: text().notNull().unique(),
  name: text().notNull(),
  /** scrypt hash in the form scrypt$N$r$p$salt$hash; null until an invitation is accepted. */
  passwordHash: text(),
  roles: text().array().$type<Role[]>().notNull().default([]),
  active: boolean().notNull().default(true),
  /** Demo accounts are refused in production mode. */
  isDemo: boolean().notNull().default(false),
  createdAt: createdAt(),
  updatedAt: timestamp({ withTimezone: true }).notNull().defaultNow(),
});

/** One-time set-password links sent by e-mail. Only the SHA-256 of the token is stored. */
export const invitations = pgTable('invitations', {
  id: id(),
  userId: uuid().notNull().references(() => users.id, { onDelete: 'cascade' }),
  tokenHash: text().notNull().unique(),
  invitedBy: uuid().references(() => users.id),
  expiresAt: timestamp({ withTimezone: true }).notNull(),
  usedAt: timestamp({ withTimezone: true }),
  createdAt: createdAt(),
});

/** Sign-in attempts, for rate limiting across app instances. */
export const loginAttempts = pgTable(
  'login_attempts',
  {
    id: id(),
    email: text().notNull(),
    ip: text().notNull(),
    success: boolean().notNull(),
    at: timestamp({ withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index().on(t.email, t.at), index().on(t.ip, t.at)],
);

/** Personal API tokens for automation (Authorization: Bearer …). Only the SHA-256 is stored. */
export const apiTokens = pgTable('api_tokens', {
  id: id(),
  userId: uuid().notNull().references(() => users.id, { onDelete: 'cascade' }),
  name: text().notNull(),
  tokenHash: text().notNull().unique(),
  /** First characters of the token, shown so a person can tell tokens apart. */
  prefix: text().notNull(),
  createdAt: createdAt(),
  lastUsedAt: timestamp({ withTimezone: true }),
  revokedAt: timestamp({ withTimezone: true }),
});

/**
 * Browser sign-ins, one row each. The session cookie (a JWT) carries the row's id, and every request checks
 * the row: sign-out, "sign out everywhere", deactivation, a role change and a new password end the rows, and
 * an ended row never works again, whatever the cookie says.
 */
export const userSessions = pgTable(
  'user_sessions',
  {
    id: id(),
    userId: uuid().notNull().references(() => users.id, { onDelete: 'cascade' }),
    createdAt: createdAt(),
    endedAt: timestamp({ withTimezone: true }),
    /** Why it ended: sign-out, everywhere, deactivated, roles, password. */
    endedBecause: text(),
  },
  (t) => [index().on(t.userId)],
);

/**
 * The session upload form: its fields and their schema, the expected form of each field, file-name rules,
 * and the shapes of an upload's answers (accepted, or refused with every problem). No I/O: shared by the
 * multipart upload (session-intake.ts), the presigned upload (presigned-uploads.ts) and the OpenAPI document.
 */
import { z } from 'zod';
import type { InputProblem } from '../engine/types';
import { cleanText, isCalendarDate } from '../shared/input';
import { formatBytes } from '../shared/display';
import type { UploadAccepted, UploadProblem, UploadRefusal } from '../shared/upload';
import { SERIAL_PATTERN } from './units';

// ---- limits ---------------------------------------------------------------------------------------

/** Problems listed in a 400 answer. */
export const MAX_LISTED_PROBLEMS = 100;

export const UPLOAD_FIELDS = ['unit', 'measuredOn', 'technician', 'instrument', 'instrumentUncertainty', 'ambientC', 'target', 'notes', 'allowOutsideLimits', 'file'] as const;

// ---- metadata -------------------------------------------------------------------------------------

// Control characters other than tab and line ends have no place in metadata.
const CONTROL = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f]/;
const text = (field: string, max: number) =>
  z
    .string()
    .trim()
    .max(max, `${field} is at most ${max} characters`)
    .refine((s) => !CONTROL.test(s), `${field} contains control characters`)
    // Bidi overrides, isolates and zero-width characters would reorder or hide text on screen: removed.
    .overwrite((s) => cleanText(s, true));

export const sessionMetaSchema = z.strictObject({
  unit: z
    .string({ error: 'unit is required: the serial number of the measured unit' })
    .trim()
    .min(1, 'unit is required: the serial number of the measured unit')
    .max(64, 'unit (serial number) is at most 64 characters')
    .regex(SERIAL_PATTERN, 'unit must be a serial number: letters, digits, ".", "_" and "-", starting with a letter or digit'),
  measuredOn: z
    .string({ error: 'measuredOn is required (YYYY-MM-DD)' })
    .trim()
    .regex(/^\d{4}-\d{2}-\d{2}$/, 'measuredOn must be a date written YYYY-MM-DD')
    .refine((s) => isCalendarDate(s, '0001-01-01', '9999-12-31'), 'measuredOn is not a calendar date')
    .refine((s) => s >= '1990-01-01', 'measuredOn is before 1990')
    // One day of slack: the technician's time zone may be ahead of the server's.
    .refine((s) => s <= new Date(Date.now() + 86_400_000).toISOString().slice(0, 10), 'measuredOn is in the future'),
  technician: text('technician', 120).default(''),
  instrument: text('instrument', 120).default(''),
  instrumentUncertainty: text('instrumentUncertainty', 120).default(''),
  ambientC: z
    .string()
    .trim()
    .max(32, 'ambientC is too long')
    .default('')
    .transform((s, ctx) => {
      if (s === '') return null;
      if (!/^[+-]?(?:\d+\.?\d*|\.\d+)$/.test(s)) {
        ctx.addIssue({ code: 'custom', message: /^[+-]?\d+,\d+$/.test(s) ? `ambientC "${s}" uses a decimal comma; write it with a point (e.g. 21.5)` : `ambientC "${s}" is not a number` });
        return z.NEVER;
      }
      const v = Number(s);
      if (v < -20 || v > 60) {
        ctx.addIssue({ code: 'custom', message: `ambientC ${v} °C is outside −20 to 60 °C` });
        return z.NEVER;
      }
      return v;
    }),
  target: text('target', 200).default(''),
  notes: text('notes', 4000).default(''),
  allowOutsideLimits: z
    .enum(['true', 'false', 'on', 'off', '1', '0', ''], { error: 'allowOutsideLimits must be true or false' })
    .default('false')
    .transform((v) => v === 'true' || v === 'on' || v === '1'),
});
export type SessionMeta = z.output<typeof sessionMetaSchema>;

/** Expected form of each field, for the problem list. */
export const FIELD_EXPECTED: Record<string, string> = {
  unit: 'the serial number of a registered unit',
  measuredOn: 'a date YYYY-MM-DD, not in the future',
  ambientC: 'a temperature in °C from −20 to 60, decimal point',
  allowOutsideLimits: 'true or false',
  technician: 'at most 120 characters',
  instrument: 'at most 120 characters',
  instrumentUncertainty: "the instrument's stated uncertainty as its certificate gives it, at most 120 characters",
  target: 'at most 200 characters',
  notes: 'at most 4000 characters',
};

/** Refuse names that look like paths; the stored key uses a sanitised copy. */
export function fileNameProblem(name: string): string | undefined {
  if (name.trim() === '') return 'the file has no name';
  if (name.length > 200) return 'the file name is longer than 200 characters';
  if (/[/\\]/.test(name) || name.includes('..') || CONTROL.test(name) || name.includes('\0')) {
    return `the file name "${name.slice(0, 80)}" looks like a path`;
  }
  return undefined;
}

export function sanitiseFileName(name: string): string {
  const s = name
    .normalize('NFKD')
    .replace(/[^A-Za-z0-9._-]+/g, '_')
    .replace(/_+/g, '_')
    .replace(/^[._]+/, '')
    .slice(0, 120);
  return s || 'session.csv';
}

// ---- problems and results -------------------------------------------------------------------------

export type { UploadAccepted, UploadProblem, UploadRefusal };

export type CreateSessionResult = { ok: true; status: 201; body: UploadAccepted } | { ok: false; status: 400 | 409 | 413 | 415 | 503; body: UploadRefusal };

/** A refusal with its problem list (the multipart upload's and the presigned upload's answers alike). */
export const refusal = <S extends number>(status: S, error: string, errors: UploadProblem[] = [], extra: Partial<UploadRefusal> & { presigned?: false } = {}) => ({
  ok: false as const,
  status,
  body: { error, errors, ...extra },
});

/** The form's problems from the metadata schema's issues, each with the field's expected form. */
export const metaProblems = (issues: z.core.$ZodIssue[]): UploadProblem[] =>
  issues.map((i) => {
    const field = i.path.map(String).join('.') || undefined;
    return { field, message: i.message, expected: field ? FIELD_EXPECTED[field] : undefined };
  });

/** The 413 answer for a file over the limit (reading stopped there). */
export const tooLargeRefusal = (maxBytes: number, fileName?: string) =>
  refusal(413, `The session file is larger than the limit of ${formatBytes(maxBytes)}; nothing was stored.`, [
    { file: fileName, field: 'file', message: `the file is over the limit of ${formatBytes(maxBytes)} (reading stopped there)`, expected: `a session file of at most ${formatBytes(maxBytes)}` },
  ]);

export const problemsOf = (ps: InputProblem[]): UploadProblem[] =>
  ps.map((p) => ({ file: p.file, line: p.line, column: p.column, message: p.message, expected: p.expected }));

/** Who uploads: the session's technician defaults to their name. */
export interface Uploader {
  id: string;
  name: string;
}

/**
 * Fit settings: the schema the API and the pages take (stored unchanged on the fit) and the engine's options
 * made from them. Used by fits.ts (creating and refitting) and jobs.ts (running), which need nothing else of
 * each other's.
 */
import { z } from 'zod';
import type { FitOptions } from '../engine/fit';
import { PARAMETER_GROUPS } from '../engine/types';

/** Fit settings as the API and the pages take them; stored unchanged on the fit. */
export const fitSettingsSchema = z.strictObject({
  groups: z
    .array(z.enum(PARAMETER_GROUPS, { error: `groups: each entry must be one of ${PARAMETER_GROUPS.join(', ')}` }))
    .min(1, 'choose at least one parameter group')
    .refine((g) => new Set(g).size === g.length, 'each parameter group once')
    .default([...PARAMETER_GROUPS]),
  holdout: z.number({ error: 'holdout must be a number from 0 to 0.5' }).min(0, 'holdout is at least 0').max(0.5, 'holdout is at most 0.5 (half the poses)').default(0),
  useSplitColumn: z.boolean({ error: 'useSplitColumn must be true or false' }).default(true),
  robust: z.boolean({ error: 'robust must be true or false' }).default(false),
  outlierThreshold: z.number({ error: 'outlierThreshold must be a number from 2 to 10' }).min(2, 'outlierThreshold is at least 2').max(10, 'outlierThreshold is at most 10').default(3),
  exclude: z
    .array(z.string({ error: 'exclude lists pose labels (text)' }).trim().min(1, 'an excluded pose label must not be empty').max(100))
    .max(10_000, 'exclude lists at most 10 000 poses')
    .default([]),
  kFold: z
    .number({ error: 'kFold must be 0 (off) or a whole number from 3 to 10' })
    .int('kFold must be a whole number')
    .refine((k) => k === 0 || (k >= 3 && k <= 10), 'kFold must be 0 (off) or from 3 to 10')
    .default(0),
  seed: z.number({ error: 'seed must be a whole number' }).int('seed must be a whole number').min(1).max(2 ** 31 - 1).default(1),
});
export type FitSettings = z.infer<typeof fitSettingsSchema>;

/** The engine's options for stored settings (robust on = Huber loss at the engine's default scale). */
export function toFitOptions(s: FitSettings): Omit<FitOptions, 'onIteration'> {
  return {
    groups: s.groups,
    holdout: s.holdout,
    useSplitColumn: s.useSplitColumn,
    robust: s.robust ? 'huber' : 'none',
    outlierThreshold: s.outlierThreshold,
    exclude: s.exclude,
    kFold: s.kFold,
    seed: s.seed,
  };
}

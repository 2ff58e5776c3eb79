/**
 * Audit actions in plain words for history lists (unknown actions fall back to their code). Every action is
 * named `<entity>.<past-tense verb>` (src/lib/server writes them; tests/unit/audit-actions.test.ts keeps the
 * pattern), so the words are keyed by the action alone.
 */
const WORDS: Record<string, string> = {
  'unit.registered': 'Unit registered',
  'arm_model.created': 'Arm model created',
  'arm_model.updated': 'Arm model changed',
  'arm_model.revised': 'New arm model revision',
  'tolerances.updated': 'Drift tolerances changed',
  'judgement.updated': 'Judgement rules changed',
  'session.uploaded': 'Session uploaded',
  'fit.created': 'Fit started',
  'fit.fitted': 'Fit finished',
  'fit.failed': 'Fit failed',
  'fit.submitted': 'Submitted for review',
  'fit.approved': 'Approved',
  'fit.returned': 'Returned to the submitter',
  'four_eyes.waived': 'Approved under the administrator exception to the four-eyes rule',
  'older_session.approved': 'Approved over a set from a later session',
  'parameter_set.created': 'Parameter set created',
  'parameter_set.superseded': 'Parameter set superseded',
  'compensation.created': 'Program uploaded for compensation',
  'compensation.completed': 'Program compensated',
  'compensation.failed': 'Program compensation failed',
  'drift_alert.raised': 'Drift beyond tolerance: alert raised',
  'drift_alert.acknowledged': 'Drift alert acknowledged',
  'webhook.registered': 'Webhook registered',
  'webhook.removed': 'Webhook removed',
};

export function auditWords(action: string): string {
  return WORDS[action] ?? action.replace(/[_.]/g, ' ');
}

/** Audit actions in plain words for history lists (unknown actions fall back to their code). */
const WORDS: Record<string, string> = {
  'unit.register': 'Unit registered',
  'arm_model.create': 'Arm model created',
  'arm_model.update': 'Arm model changed',
  'arm_model.new_revision': 'New arm model revision',
  'arm_model.tolerances.updated': 'Drift tolerances changed',
  'session.session.uploaded': 'Session uploaded',
  'fit.fit.created': 'Fit started',
  'fit.fit.fitted': 'Fit finished',
  'fit.fit.failed': 'Fit failed',
  'fit.fit.submitted': 'Submitted for review',
  'fit.fit.approved': 'Approved',
  'fit.fit.returned': 'Returned to the submitter',
  'parameter_set.parameter_set.created': 'Parameter set created',
  'parameter_set.parameter_set.superseded': 'Parameter set superseded',
  'parameter_set.compensation.created': 'Program uploaded for compensation',
  'parameter_set.compensation.done': 'Program compensated',
  'parameter_set.compensation.failed': 'Program compensation failed',
  'alert.drift.alert': 'Drift beyond tolerance: alert raised',
  'alert.drift.acknowledged': 'Drift alert acknowledged',
};

export function auditWords(entityType: string, action: string): string {
  return WORDS[`${entityType}.${action}`] ?? WORDS[`${entityType}.${entityType}.${action}`] ?? `${entityType.replace(/_/g, ' ')}: ${action.replace(/[_.]/g, ' ')}`;
}

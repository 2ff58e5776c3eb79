import { auditLog } from '../../db/schema';
import type { Db } from './db';

type Tx = Pick<Db, 'insert'>;

export interface AuditEntry {
  actorId: string | null;
  unitId?: string | null;
  entityType: 'user' | 'arm_model' | 'unit' | 'session' | 'fit' | 'parameter_set' | 'alert' | 'export' | 'token' | 'webhook';
  entityId?: string | null;
  action: string;
  comment?: string | null;
  details?: Record<string, unknown>;
}

/** Write an audit entry in the caller's transaction, so the record exists exactly when the change does. */
export async function audit(tx: Tx, entry: AuditEntry) {
  await tx.insert(auditLog).values({
    actorId: entry.actorId,
    unitId: entry.unitId ?? null,
    entityType: entry.entityType,
    entityId: entry.entityId ?? null,
    action: entry.action,
    comment: entry.comment ?? null,
    details: entry.details,
  });
}

-- Audit action names follow one pattern, <entity>.<past-tense verb>: the older names in existing rows are
-- renamed to the names the code now writes (src/lib/server; tests/unit/audit-actions.test.ts keeps the pattern).
UPDATE "audit_log" SET "action" = 'unit.registered' WHERE "action" = 'register' AND "entity_type" = 'unit';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'arm_model.created' WHERE "action" = 'create' AND "entity_type" = 'arm_model';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'arm_model.updated' WHERE "action" = 'update' AND "entity_type" = 'arm_model';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'arm_model.revised' WHERE "action" = 'new_revision' AND "entity_type" = 'arm_model';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'drift_alert.raised' WHERE "action" = 'drift.alert';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'drift_alert.acknowledged' WHERE "action" = 'drift.acknowledged';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'compensation.completed' WHERE "action" = 'compensation.done';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'four_eyes.waived' WHERE "action" = 'fit.four_eyes_exception';--> statement-breakpoint
UPDATE "audit_log" SET "action" = 'older_session.approved' WHERE "action" = 'fit.approved_older_session';

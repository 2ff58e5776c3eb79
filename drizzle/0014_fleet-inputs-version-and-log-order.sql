DROP INDEX "export_log_at_idx";--> statement-breakpoint
DROP INDEX "fleet_snapshots_model_id_computed_at_index";--> statement-breakpoint
ALTER TABLE "arm_models" ADD COLUMN "fleet_inputs_version" bigint DEFAULT 0 NOT NULL;--> statement-breakpoint
CREATE INDEX "export_log_at_id_idx" ON "export_log" USING btree ("at","id");--> statement-breakpoint
CREATE INDEX "fleet_snapshots_model_computed_idx" ON "fleet_snapshots" USING btree ("model_id","computed_at");
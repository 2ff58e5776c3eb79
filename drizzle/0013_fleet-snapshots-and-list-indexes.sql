CREATE TABLE "fleet_snapshot_units" (
	"snapshot_id" uuid NOT NULL,
	"rank" integer NOT NULL,
	"unit_id" uuid NOT NULL,
	"serial" text NOT NULL,
	"flagged" boolean NOT NULL,
	"data" jsonb NOT NULL,
	CONSTRAINT "fleet_snapshot_units_snapshot_id_rank_pk" PRIMARY KEY("snapshot_id","rank")
);
--> statement-breakpoint
CREATE TABLE "fleet_snapshots" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"model_id" uuid NOT NULL,
	"fingerprint" text NOT NULL,
	"computed_at" timestamp with time zone DEFAULT now() NOT NULL,
	"duration_ms" integer NOT NULL,
	"unit_count" integer NOT NULL,
	"summary" jsonb NOT NULL
);
--> statement-breakpoint
ALTER TABLE "fleet_snapshot_units" ADD CONSTRAINT "fleet_snapshot_units_snapshot_id_fleet_snapshots_id_fk" FOREIGN KEY ("snapshot_id") REFERENCES "public"."fleet_snapshots"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "fleet_snapshots" ADD CONSTRAINT "fleet_snapshots_model_id_arm_models_id_fk" FOREIGN KEY ("model_id") REFERENCES "public"."arm_models"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "fleet_snapshots_model_id_computed_at_index" ON "fleet_snapshots" USING btree ("model_id","computed_at" DESC NULLS LAST);--> statement-breakpoint
CREATE INDEX "units_model_revision_idx" ON "units" USING btree ("model_revision_id","serial");--> statement-breakpoint
CREATE INDEX "units_serial_trgm" ON "units" USING gin ("serial" gin_trgm_ops);--> statement-breakpoint
CREATE INDEX "units_site_trgm" ON "units" USING gin ("site" gin_trgm_ops);--> statement-breakpoint
CREATE INDEX "units_cell_trgm" ON "units" USING gin ("cell" gin_trgm_ops);--> statement-breakpoint
CREATE INDEX "export_log_at_idx" ON "export_log" USING btree ("at" DESC NULLS LAST,"id" DESC NULLS LAST);
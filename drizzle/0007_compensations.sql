CREATE TABLE "compensations" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"unit_id" uuid NOT NULL,
	"parameter_set_id" uuid NOT NULL,
	"nominal_revision_id" uuid NOT NULL,
	"state" text DEFAULT 'queued' NOT NULL,
	"frame" text NOT NULL,
	"tool" jsonb,
	"target_count" integer NOT NULL,
	"input_name" text NOT NULL,
	"input_key" text NOT NULL,
	"input_sha256" text NOT NULL,
	"input_bytes" integer NOT NULL,
	"output_key" text,
	"output_sha256" text,
	"output_bytes" integer,
	"summary" jsonb,
	"progress" jsonb,
	"error" text,
	"attempts" integer DEFAULT 0 NOT NULL,
	"created_by" uuid NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"finished_at" timestamp with time zone,
	CONSTRAINT "compensations_inputKey_unique" UNIQUE("input_key"),
	CONSTRAINT "compensations_outputKey_unique" UNIQUE("output_key")
);
--> statement-breakpoint
ALTER TABLE "compensations" ADD CONSTRAINT "compensations_unit_id_units_id_fk" FOREIGN KEY ("unit_id") REFERENCES "public"."units"("id") ON DELETE restrict ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "compensations" ADD CONSTRAINT "compensations_parameter_set_id_parameter_sets_id_fk" FOREIGN KEY ("parameter_set_id") REFERENCES "public"."parameter_sets"("id") ON DELETE restrict ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "compensations" ADD CONSTRAINT "compensations_nominal_revision_id_arm_model_revisions_id_fk" FOREIGN KEY ("nominal_revision_id") REFERENCES "public"."arm_model_revisions"("id") ON DELETE restrict ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "compensations" ADD CONSTRAINT "compensations_created_by_users_id_fk" FOREIGN KEY ("created_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "compensations_unit_id_created_at_index" ON "compensations" USING btree ("unit_id","created_at");--> statement-breakpoint
CREATE INDEX "compensations_created_at_index" ON "compensations" USING btree ("created_at");
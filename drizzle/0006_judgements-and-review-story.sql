ALTER TABLE "arm_models" ADD COLUMN "judgement" jsonb;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "verdicts" jsonb;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "submit_note" text;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "override_note" text;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "override_by" uuid;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "override_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "fits" ADD COLUMN "exclusion_note" text;--> statement-breakpoint
ALTER TABLE "fits" ADD CONSTRAINT "fits_override_by_users_id_fk" FOREIGN KEY ("override_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;
CREATE TABLE "fit_poses" (
	"fit_id" uuid NOT NULL,
	"idx" integer NOT NULL,
	"label" text NOT NULL,
	"line" integer NOT NULL,
	"role" text NOT NULL,
	"before_x" double precision NOT NULL,
	"before_y" double precision NOT NULL,
	"before_z" double precision NOT NULL,
	"after_x" double precision NOT NULL,
	"after_y" double precision NOT NULL,
	"after_z" double precision NOT NULL,
	"error_before" double precision NOT NULL,
	"error_after" double precision NOT NULL,
	"standardised" double precision,
	"outlier" boolean NOT NULL,
	CONSTRAINT "fit_poses_fit_id_idx_pk" PRIMARY KEY("fit_id","idx")
);
--> statement-breakpoint
ALTER TABLE "fit_poses" ADD CONSTRAINT "fit_poses_fit_id_fits_id_fk" FOREIGN KEY ("fit_id") REFERENCES "public"."fits"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "fit_poses_fit_id_error_after_index" ON "fit_poses" USING btree ("fit_id","error_after");
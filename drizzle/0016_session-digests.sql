CREATE TABLE "session_digests" (
	"session_id" uuid PRIMARY KEY NOT NULL,
	"key" text NOT NULL,
	"body" jsonb NOT NULL,
	"computed_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "session_digests" ADD CONSTRAINT "session_digests_session_id_sessions_id_fk" FOREIGN KEY ("session_id") REFERENCES "public"."sessions"("id") ON DELETE cascade ON UPDATE no action;
DROP INDEX "units_serial_trgm";--> statement-breakpoint
DROP INDEX "units_cell_trgm";--> statement-breakpoint
ALTER TABLE "units" ADD COLUMN "search_text" text GENERATED ALWAYS AS (lower(serial || ' ' || site || ' ' || cell)) STORED NOT NULL;--> statement-breakpoint
CREATE INDEX "units_search_trgm" ON "units" USING gin ("search_text" gin_trgm_ops);
-- Approved parameter sets are records of what a robot was given: never edited, never deleted.
-- The only change allowed is current -> superseded when the next version is approved.
CREATE OR REPLACE FUNCTION parameter_sets_guard() RETURNS trigger AS $$
BEGIN
  IF TG_OP = 'TRUNCATE' THEN
    RAISE EXCEPTION 'approved parameter sets cannot be truncated' USING ERRCODE = 'integrity_constraint_violation';
  END IF;
  IF TG_OP = 'DELETE' THEN
    RAISE EXCEPTION 'parameter set % (unit %, v%) is approved and cannot be deleted', OLD.id, OLD.unit_id, OLD.version
      USING ERRCODE = 'integrity_constraint_violation';
  END IF;
  IF OLD.state = 'current' AND NEW.state = 'superseded'
     AND (to_jsonb(NEW) - 'state') = (to_jsonb(OLD) - 'state') THEN
    RETURN NEW;
  END IF;
  RAISE EXCEPTION 'parameter set % (unit %, v%) is approved and cannot be changed', OLD.id, OLD.unit_id, OLD.version
    USING ERRCODE = 'integrity_constraint_violation';
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER parameter_sets_immutable
  BEFORE UPDATE OR DELETE ON parameter_sets
  FOR EACH ROW EXECUTE FUNCTION parameter_sets_guard();
--> statement-breakpoint
CREATE TRIGGER parameter_sets_no_truncate
  BEFORE TRUNCATE ON parameter_sets
  FOR EACH STATEMENT EXECUTE FUNCTION parameter_sets_guard();

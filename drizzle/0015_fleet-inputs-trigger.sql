-- arm_models.fleet_inputs_version counts changes of what a model's fleet statistics are computed from, so the
-- fleet page can tell in one row read whether its snapshot is still current. Every new parameter set and
-- every change of a set's state (current -> superseded) adds one to the version of the set's unit's model;
-- so does a change of the model's judgement settings. Statement-level triggers with transition tables: a
-- batch of thousands of sets in one statement updates each model's row once.
CREATE OR REPLACE FUNCTION parameter_sets_bump_fleet_inputs() RETURNS trigger AS $$
BEGIN
  UPDATE arm_models m SET fleet_inputs_version = m.fleet_inputs_version + 1
  WHERE m.id IN (
    SELECT r.model_id FROM changed_sets c
    JOIN units u ON u.id = c.unit_id
    JOIN arm_model_revisions r ON r.id = u.model_revision_id
  );
  RETURN NULL;
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER parameter_sets_fleet_inputs_insert
  AFTER INSERT ON parameter_sets REFERENCING NEW TABLE AS changed_sets
  FOR EACH STATEMENT EXECUTE FUNCTION parameter_sets_bump_fleet_inputs();
--> statement-breakpoint
CREATE TRIGGER parameter_sets_fleet_inputs_update
  AFTER UPDATE ON parameter_sets REFERENCING NEW TABLE AS changed_sets
  FOR EACH STATEMENT EXECUTE FUNCTION parameter_sets_bump_fleet_inputs();
--> statement-breakpoint
CREATE OR REPLACE FUNCTION arm_models_bump_fleet_inputs() RETURNS trigger AS $$
BEGIN
  IF NEW.judgement IS DISTINCT FROM OLD.judgement THEN
    NEW.fleet_inputs_version := OLD.fleet_inputs_version + 1;
  END IF;
  RETURN NEW;
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER arm_models_fleet_inputs
  BEFORE UPDATE OF judgement ON arm_models
  FOR EACH ROW EXECUTE FUNCTION arm_models_bump_fleet_inputs();

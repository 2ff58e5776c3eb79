-- Freeze, at approval, the facts an approved set's exports and certificate state about the world (serial,
-- site, arm model name and revision, approver, who ran and who submitted the fit), so renaming a model or a person later never changes the bytes
-- of an approved set's files. Filled on INSERT from the unit, the fit's session revision and the approver;
-- afterwards the row's immutability trigger keeps it as it is.
CREATE OR REPLACE FUNCTION parameter_sets_frozen_facts(p_unit uuid, p_fit uuid, p_approver uuid) RETURNS jsonb AS $$
  SELECT jsonb_build_object(
    'serial', u.serial, 'site', u.site, 'cell', u.cell,
    'modelId', m.id, 'modelName', m.name, 'manufacturer', m.manufacturer, 'revision', r.revision,
    'approverName', a.name, 'approverEmail', a.email,
    'runByName', coalesce(rb.name, ''), 'submittedByName', coalesce(sb.name, ''))
  FROM units u, fits f
  JOIN sessions s ON s.id = f.session_id
  JOIN arm_model_revisions r ON r.id = s.model_revision_id
  JOIN arm_models m ON m.id = r.model_id
  LEFT JOIN users rb ON rb.id = f.created_by
  LEFT JOIN users sb ON sb.id = f.submitted_by,
  users a
  WHERE u.id = p_unit AND f.id = p_fit AND a.id = p_approver;
$$ LANGUAGE sql STABLE;
--> statement-breakpoint
CREATE OR REPLACE FUNCTION parameter_sets_freeze() RETURNS trigger AS $$
BEGIN
  NEW.frozen := parameter_sets_frozen_facts(NEW.unit_id, NEW.fit_id, NEW.approved_by);
  IF NEW.frozen IS NULL THEN
    RAISE EXCEPTION 'parameter set for unit %: unit, fit or approver not found', NEW.unit_id USING ERRCODE = 'foreign_key_violation';
  END IF;
  RETURN NEW;
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER parameter_sets_freeze
  BEFORE INSERT ON parameter_sets
  FOR EACH ROW EXECUTE FUNCTION parameter_sets_freeze();
--> statement-breakpoint
-- Sets approved before this migration: frozen once, now, from the same sources (the only time the
-- immutability trigger is stepped around, inside this migration's transaction).
ALTER TABLE parameter_sets DISABLE TRIGGER parameter_sets_immutable;
--> statement-breakpoint
UPDATE parameter_sets SET frozen = parameter_sets_frozen_facts(unit_id, fit_id, approved_by) WHERE frozen IS NULL;
--> statement-breakpoint
ALTER TABLE parameter_sets ENABLE TRIGGER parameter_sets_immutable;

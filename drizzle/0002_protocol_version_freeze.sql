-- An approved protocol version is frozen: studies pin it, so its content, status and approval can never change.
-- The service refuses such changes too; this trigger makes the rule hold for any other writer.
CREATE FUNCTION protocol_version_frozen() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  IF NEW.settings IS DISTINCT FROM OLD.settings
     OR NEW.status IS DISTINCT FROM OLD.status
     OR NEW.approved_by IS DISTINCT FROM OLD.approved_by
     OR NEW.approved_at IS DISTINCT FROM OLD.approved_at
     OR NEW.version_number IS DISTINCT FROM OLD.version_number
     OR NEW.protocol_id IS DISTINCT FROM OLD.protocol_id
     OR NEW.laboratory_id IS DISTINCT FROM OLD.laboratory_id
     OR NEW.template_id IS DISTINCT FROM OLD.template_id THEN
    RAISE EXCEPTION 'protocol version % is approved and cannot change; start a new version instead', OLD.id
      USING ERRCODE = 'check_violation';
  END IF;
  RETURN NEW;
END;
$$;
--> statement-breakpoint
CREATE TRIGGER protocol_versions_freeze_approved
  BEFORE UPDATE ON protocol_versions
  FOR EACH ROW
  WHEN (OLD.status = 'approved')
  EXECUTE FUNCTION protocol_version_frozen();

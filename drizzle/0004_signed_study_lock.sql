-- A signed study is frozen in the database itself, not only by the services: these triggers refuse every
-- writer, including direct SQL. An amendment never edits a signed study; it opens a new study row (the next
-- revision) that copies the data. Signatures and audit events are append-only.
-- Errors use SQLSTATE 23514 (check_violation) like the protocol-version freeze, with a message naming the rule.
--
-- Tests that tamper with audit rows on purpose (to show the chain catches it) must switch the append-only
-- trigger off for their own session as a superuser/table owner, e.g. in one transaction:
--   SET LOCAL session_replication_role = replica;  -- ordinary triggers do not fire for this session
-- or table-wide: ALTER TABLE audit_events DISABLE TRIGGER audit_events_append_only; … ENABLE TRIGGER …
-- (src/server/signoff.ts exports these names as LOCK_TRIGGERS).

-- Samples, results, exclusions and analysis runs of a signed study: no insert, update or delete.
-- An update is checked against both the old and the new study, so a row cannot be moved out of or into one.
CREATE FUNCTION refuse_signed_study_data_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  IF TG_OP IN ('UPDATE', 'DELETE') AND EXISTS (SELECT 1 FROM studies WHERE id = OLD.study_id AND state = 'signed') THEN
    RAISE EXCEPTION 'study % is signed and locked: % of % refused; open an amendment (a new revision) instead', OLD.study_id, lower(TG_OP), TG_TABLE_NAME
      USING ERRCODE = 'check_violation';
  END IF;
  IF TG_OP IN ('INSERT', 'UPDATE') AND EXISTS (SELECT 1 FROM studies WHERE id = NEW.study_id AND state = 'signed') THEN
    RAISE EXCEPTION 'study % is signed and locked: % of % refused; open an amendment (a new revision) instead', NEW.study_id, lower(TG_OP), TG_TABLE_NAME
      USING ERRCODE = 'check_violation';
  END IF;
  IF TG_OP = 'DELETE' THEN
    RETURN OLD;
  END IF;
  RETURN NEW;
END;
$$;
--> statement-breakpoint
CREATE TRIGGER samples_signed_study_lock BEFORE INSERT OR UPDATE OR DELETE ON samples
  FOR EACH ROW EXECUTE FUNCTION refuse_signed_study_data_change();
--> statement-breakpoint
CREATE TRIGGER results_signed_study_lock BEFORE INSERT OR UPDATE OR DELETE ON results
  FOR EACH ROW EXECUTE FUNCTION refuse_signed_study_data_change();
--> statement-breakpoint
CREATE TRIGGER exclusions_signed_study_lock BEFORE INSERT OR UPDATE OR DELETE ON exclusions
  FOR EACH ROW EXECUTE FUNCTION refuse_signed_study_data_change();
--> statement-breakpoint
CREATE TRIGGER analysis_runs_signed_study_lock BEFORE INSERT OR UPDATE OR DELETE ON analysis_runs
  FOR EACH ROW EXECUTE FUNCTION refuse_signed_study_data_change();
--> statement-breakpoint
-- A signed study row itself: nothing about it changes and it is never deleted (nor, through the cascade, its data).
CREATE FUNCTION refuse_signed_study_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION 'study % is signed and locked: % refused; open an amendment (a new revision) instead', OLD.id, lower(TG_OP)
    USING ERRCODE = 'check_violation';
END;
$$;
--> statement-breakpoint
CREATE TRIGGER studies_signed_frozen BEFORE UPDATE OR DELETE ON studies
  FOR EACH ROW WHEN (OLD.state = 'signed') EXECUTE FUNCTION refuse_signed_study_change();
--> statement-breakpoint
-- A signature is given once, to a study that is not yet signed (the signing transaction inserts it first).
CREATE FUNCTION refuse_signature_on_signed_study() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  IF EXISTS (SELECT 1 FROM studies WHERE id = NEW.study_id AND state = 'signed') THEN
    RAISE EXCEPTION 'study % is already signed: a further signature is refused', NEW.study_id
      USING ERRCODE = 'check_violation';
  END IF;
  RETURN NEW;
END;
$$;
--> statement-breakpoint
CREATE TRIGGER signatures_once BEFORE INSERT ON signatures
  FOR EACH ROW EXECUTE FUNCTION refuse_signature_on_signed_study();
--> statement-breakpoint
-- Append-only tables: rows are added, never changed or removed (row triggers), nor emptied (TRUNCATE).
CREATE FUNCTION refuse_append_only_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION '% is append-only: % refused', TG_TABLE_NAME, lower(TG_OP)
    USING ERRCODE = 'check_violation';
END;
$$;
--> statement-breakpoint
CREATE TRIGGER signatures_append_only BEFORE UPDATE OR DELETE ON signatures
  FOR EACH ROW EXECUTE FUNCTION refuse_append_only_change();
--> statement-breakpoint
CREATE TRIGGER signatures_no_truncate BEFORE TRUNCATE ON signatures
  FOR EACH STATEMENT EXECUTE FUNCTION refuse_append_only_change();
--> statement-breakpoint
CREATE TRIGGER audit_events_append_only BEFORE UPDATE OR DELETE ON audit_events
  FOR EACH ROW EXECUTE FUNCTION refuse_append_only_change();
--> statement-breakpoint
CREATE TRIGGER audit_events_no_truncate BEFORE TRUNCATE ON audit_events
  FOR EACH STATEMENT EXECUTE FUNCTION refuse_append_only_change();

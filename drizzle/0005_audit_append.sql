-- Appending an audit event in one statement (src/server/audit.ts recordAudit): the chain's advisory lock, the read
-- of the chain's last hash and the insert happen inside the database, so the lock, held until the writer's commit,
-- is taken by the last statement of the transaction and costs one round trip instead of three.
-- The caller passes the event's canonical content (canonicalJson of the stored fields, computed by the app from the
-- same values it passes here); hash = sha256(previous hash || E'\n' || content) as hex, exactly as chainHash in
-- src/server/audit.ts computes it, which verifyChain recomputes from the stored fields.
-- Each statement of a plpgsql function takes a fresh snapshot under READ COMMITTED, so the last hash is read after
-- the lock is granted and sees the previous writer's committed event.
CREATE FUNCTION append_audit_event(
  p_laboratory_id uuid,
  p_actor_user_id text,
  p_action text,
  p_entity_type text,
  p_entity_id text,
  p_data jsonb,
  p_occurred_at timestamptz,
  p_content text
) RETURNS SETOF audit_events LANGUAGE plpgsql AS $$
DECLARE
  previous text;
BEGIN
  PERFORM pg_advisory_xact_lock(hashtext('audit:' || coalesce(p_laboratory_id::text, 'no-laboratory')));
  IF p_laboratory_id IS NULL THEN
    SELECT hash INTO previous FROM audit_events WHERE laboratory_id IS NULL ORDER BY id DESC LIMIT 1;
  ELSE
    SELECT hash INTO previous FROM audit_events WHERE laboratory_id = p_laboratory_id ORDER BY id DESC LIMIT 1;
  END IF;
  previous := coalesce(previous, repeat('0', 64));
  RETURN QUERY
    INSERT INTO audit_events (laboratory_id, actor_user_id, action, entity_type, entity_id, data, occurred_at, prev_hash, hash)
    VALUES (p_laboratory_id, p_actor_user_id, p_action, p_entity_type, p_entity_id, p_data, p_occurred_at, previous,
            encode(sha256(convert_to(previous || E'\n' || p_content, 'UTF8')), 'hex'))
    RETURNING *;
END;
$$;

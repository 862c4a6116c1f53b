-- Flags become cases: one row per kind + assessor + product + attribute (the scope), whatever
-- session its evidence window starts at (findings about one session's data -- data-entry checks
-- and straight-lining -- keep the session in their scope: each is about that session's cells),
-- so a weekly refit updates the evidence in place and a review (dismissed with a note) stays with
-- the case. flag_key is now that scope key.
-- Existing rows of one scope are merged: the row with the latest review keeps its id, status and
-- note; the evidence comes from the row the latest build produced (if any).
CREATE TABLE flag_next (
  id               INTEGER PRIMARY KEY,
  panel_id         INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  flag_key         TEXT NOT NULL,
  kind             TEXT NOT NULL,
  assessor         TEXT,
  product          TEXT,
  attribute        TEXT,
  -- where the current evidence starts (the engine's firstSession)
  first_session    TEXT NOT NULL,
  severity         TEXT NOT NULL CHECK (severity IN ('watch', 'act')),
  evidence_json    TEXT NOT NULL,
  message          TEXT NOT NULL,
  -- current: the latest flag build produced this case (its evidence fires now)
  current          INTEGER NOT NULL DEFAULT 1 CHECK (current IN (0, 1)),
  status           TEXT NOT NULL DEFAULT 'open' CHECK (status IN ('open', 'dismissed', 'closed')),
  review_note      TEXT,
  reviewed_at      TEXT,
  first_seen_at    TEXT NOT NULL,
  data_signature   TEXT NOT NULL,
  -- the session whose data first raised the case, and the newest session its evidence reflects
  detected_session TEXT NOT NULL,
  updated_session  TEXT NOT NULL,
  -- the newest session of the panel when the status last changed (review, auto close, re-open)
  status_session   TEXT,
  -- the newest session of the panel when the evidence last got materially worse
  worsened_session TEXT,
  -- severity and evidence at the time of dismissal: what "within what was dismissed" compares to
  dismissed_severity      TEXT,
  dismissed_evidence_json TEXT,
  UNIQUE (panel_id, flag_key)
);

INSERT INTO flag_next (id, panel_id, flag_key, kind, assessor, product, attribute, first_session, severity,
                       evidence_json, message, current, status, review_note, reviewed_at, first_seen_at,
                       data_signature, detected_session, updated_session, status_session, worsened_session,
                       dismissed_severity, dismissed_evidence_json)
SELECT k.id, k.panel_id,
       k.scope,
       k.kind, k.assessor, k.product, k.attribute,
       IFNULL(c.first_session, k.first_session), IFNULL(c.severity, k.severity),
       IFNULL(c.evidence_json, k.evidence_json), IFNULL(c.message, k.message),
       CASE WHEN c.id IS NULL THEN 0 ELSE 1 END,
       k.status, k.review_note, k.reviewed_at,
       (SELECT MIN(o.first_seen_at) FROM flag o WHERE o.panel_id = k.panel_id AND o.kind || '|' || IFNULL(o.assessor, '') || '|' || IFNULL(o.product, '') || '|' || IFNULL(o.attribute, '') || CASE WHEN o.kind IN ('out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining') THEN '|' || o.first_session ELSE '' END = k.scope),
       IFNULL(c.data_signature, k.data_signature),
       IFNULL(json_extract(k.evidence_json, '$.lastSession'), k.first_session),
       IFNULL(json_extract(IFNULL(c.evidence_json, k.evidence_json), '$.lastSession'), IFNULL(c.first_session, k.first_session)),
       NULL, NULL,
       CASE WHEN k.status = 'dismissed' THEN k.severity END,
       CASE WHEN k.status = 'dismissed' THEN k.evidence_json END
FROM (
  SELECT f.*, f.kind || '|' || IFNULL(f.assessor, '') || '|' || IFNULL(f.product, '') || '|' || IFNULL(f.attribute, '') || CASE WHEN f.kind IN ('out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining') THEN '|' || f.first_session ELSE '' END AS scope, ROW_NUMBER() OVER (
           PARTITION BY f.panel_id, f.kind || '|' || IFNULL(f.assessor, '') || '|' || IFNULL(f.product, '') || '|' || IFNULL(f.attribute, '') || CASE WHEN f.kind IN ('out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining') THEN '|' || f.first_session ELSE '' END
           ORDER BY (f.status <> 'open') DESC, IFNULL(f.reviewed_at, '') DESC, f.current DESC, f.id DESC) AS rn
  FROM flag f
) k
LEFT JOIN flag c ON c.panel_id = k.panel_id AND c.current = 1 AND c.kind || '|' || IFNULL(c.assessor, '') || '|' || IFNULL(c.product, '') || '|' || IFNULL(c.attribute, '') || CASE WHEN c.kind IN ('out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining') THEN '|' || c.first_session ELSE '' END = k.scope
WHERE k.rn = 1;

-- Retraining links named the old keys (with the evidence start); point them at the case keys.
CREATE TABLE retraining_flag_next (
  retraining_id INTEGER NOT NULL REFERENCES retraining(id) ON DELETE CASCADE,
  flag_key      TEXT NOT NULL,
  PRIMARY KEY (retraining_id, flag_key)
);
INSERT OR IGNORE INTO retraining_flag_next (retraining_id, flag_key)
SELECT rf.retraining_id,
       IFNULL((SELECT o.kind || '|' || IFNULL(o.assessor, '') || '|' || IFNULL(o.product, '') || '|' || IFNULL(o.attribute, '') || CASE WHEN o.kind IN ('out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining') THEN '|' || o.first_session ELSE '' END
               FROM flag o WHERE o.flag_key = rf.flag_key LIMIT 1), rf.flag_key)
FROM retraining_flag rf;
DROP TABLE retraining_flag;
ALTER TABLE retraining_flag_next RENAME TO retraining_flag;

DROP TABLE flag;
ALTER TABLE flag_next RENAME TO flag;
CREATE INDEX flag_by_panel ON flag (panel_id, current, status);

-- Every status change of a case: who (as typed; the service has one shared access token, not
-- accounts), when, the note, the newest session at the time, and for automatic changes the reason.
CREATE TABLE flag_review (
  id             INTEGER PRIMARY KEY,
  flag_id        INTEGER NOT NULL REFERENCES flag(id) ON DELETE CASCADE,
  status         TEXT NOT NULL CHECK (status IN ('open', 'dismissed', 'closed')),
  note           TEXT NOT NULL DEFAULT '',
  reviewed_by    TEXT NOT NULL DEFAULT '',
  reviewed_at    TEXT NOT NULL,
  session_label  TEXT,
  -- 'review' (a person), 'reopened' (got materially worse), 'no-longer-fires', 'fires-again', 'retraining'
  source         TEXT NOT NULL DEFAULT 'review'
);
CREATE INDEX flag_review_by_flag ON flag_review (flag_id, id);
INSERT INTO flag_review (flag_id, status, note, reviewed_at, source)
SELECT id, status, IFNULL(review_note, ''), reviewed_at, 'review' FROM flag WHERE status <> 'open' AND reviewed_at IS NOT NULL;

-- A retraining recorded as done creates the baseline-restarting event: the event names its record.
ALTER TABLE panel_event ADD COLUMN retraining_id INTEGER REFERENCES retraining(id) ON DELETE CASCADE;

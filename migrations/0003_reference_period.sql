-- A reference period the panel leader picks for chart baselines (sessions `session_label` to
-- `until_session_label`, inclusive), recorded as a panel event of its own kind. SQLite cannot
-- change a CHECK constraint in place, so the table is rebuilt with its rows and ids kept.
CREATE TABLE panel_event_next (
  id                  INTEGER PRIMARY KEY,
  panel_id            INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  kind                TEXT NOT NULL CHECK (kind IN ('retraining', 'control-batch', 'note', 'reference-period')),
  -- the first session the event applies to (a reference period's first session)
  session_label       TEXT NOT NULL,
  -- a reference period's last session; NULL for every other kind
  until_session_label TEXT,
  assessor            TEXT,
  note                TEXT NOT NULL DEFAULT '',
  created_at          TEXT NOT NULL,
  CHECK ((kind = 'reference-period') = (until_session_label IS NOT NULL))
);
INSERT INTO panel_event_next (id, panel_id, kind, session_label, assessor, note, created_at)
  SELECT id, panel_id, kind, session_label, assessor, note, created_at FROM panel_event;
DROP TABLE panel_event;
ALTER TABLE panel_event_next RENAME TO panel_event;
CREATE INDEX panel_event_by_panel ON panel_event (panel_id, session_label);

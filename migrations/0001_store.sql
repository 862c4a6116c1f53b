-- Core store: panels, their attributes/assessors/products, sessions, ratings,
-- the import log, the correction history and the quarantine.
-- Timestamps are ISO-8601 UTC text; dates (session_date) are YYYY-MM-DD.

CREATE TABLE panel (
  id            INTEGER PRIMARY KEY,
  name          TEXT NOT NULL UNIQUE,
  created_at    TEXT NOT NULL,
  -- per-panel thresholds and chart settings (JSON object, validated in code)
  settings_json TEXT NOT NULL DEFAULT '{}'
);

CREATE TABLE attribute (
  id          INTEGER PRIMARY KEY,
  panel_id    INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  name        TEXT NOT NULL,
  scale_min   REAL NOT NULL,
  scale_max   REAL NOT NULL,
  anchor_low  TEXT,
  anchor_high TEXT,
  UNIQUE (panel_id, name),
  CHECK (scale_min < scale_max)
);

CREATE TABLE assessor (
  id       INTEGER PRIMARY KEY,
  panel_id INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  code     TEXT NOT NULL,
  active   INTEGER NOT NULL DEFAULT 1 CHECK (active IN (0, 1)),
  UNIQUE (panel_id, code)
);

CREATE TABLE product (
  id           INTEGER PRIMARY KEY,
  panel_id     INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  code         TEXT NOT NULL,
  display_name TEXT,
  role         TEXT NOT NULL DEFAULT 'test' CHECK (role IN ('test', 'reference')),
  UNIQUE (panel_id, code)
);

CREATE TABLE import (
  id             INTEGER PRIMARY KEY,
  panel_id       INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  file_name      TEXT NOT NULL,
  content_sha256 TEXT NOT NULL,
  source         TEXT NOT NULL CHECK (source IN ('cli', 'http', 'web')),
  started_at     TEXT NOT NULL,
  finished_at    TEXT,
  -- imported: ratings written; unchanged: identical content already stored;
  -- rejected: nothing written; quarantined: valid rows written, invalid cells held.
  outcome        TEXT NOT NULL CHECK (outcome IN ('imported', 'unchanged', 'rejected', 'quarantined')),
  n_rows         INTEGER NOT NULL DEFAULT 0,
  n_ratings      INTEGER NOT NULL DEFAULT 0,
  n_sessions     INTEGER NOT NULL DEFAULT 0,
  n_replaced     INTEGER NOT NULL DEFAULT 0,
  n_quarantined  INTEGER NOT NULL DEFAULT 0,
  n_errors       INTEGER NOT NULL DEFAULT 0,
  -- full answer given to the user (counts, findings, first 100 errors)
  report_json    TEXT NOT NULL DEFAULT '{}'
);
CREATE INDEX import_by_panel_hash ON import (panel_id, content_sha256);

CREATE TABLE session (
  id           INTEGER PRIMARY KEY,
  panel_id     INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  label        TEXT NOT NULL,
  session_date TEXT NOT NULL,
  -- bumped every time the session's ratings change; fits record the version they used
  data_version INTEGER NOT NULL DEFAULT 1,
  import_id    INTEGER REFERENCES import(id),
  UNIQUE (panel_id, label)
);
CREATE INDEX session_by_date ON session (panel_id, session_date, label);

CREATE TABLE rating (
  id           INTEGER PRIMARY KEY,
  session_id   INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  assessor_id  INTEGER NOT NULL REFERENCES assessor(id),
  product_id   INTEGER NOT NULL REFERENCES product(id),
  attribute_id INTEGER NOT NULL REFERENCES attribute(id),
  replicate    INTEGER NOT NULL CHECK (replicate >= 1),
  value        REAL NOT NULL,
  sample_code  TEXT,
  import_id    INTEGER NOT NULL REFERENCES import(id),
  UNIQUE (session_id, attribute_id, assessor_id, product_id, replicate)
);

-- A replaced or removed value is never lost: one row per changed cell.
CREATE TABLE rating_correction (
  id                    INTEGER PRIMARY KEY,
  session_id            INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  assessor_id           INTEGER NOT NULL REFERENCES assessor(id),
  product_id            INTEGER NOT NULL REFERENCES product(id),
  attribute_id          INTEGER NOT NULL REFERENCES attribute(id),
  replicate             INTEGER NOT NULL,
  old_value             REAL NOT NULL,
  old_sample_code       TEXT,
  old_import_id         INTEGER NOT NULL REFERENCES import(id),
  new_value             REAL,          -- NULL when the new version no longer has the cell
  replaced_by_import_id INTEGER NOT NULL REFERENCES import(id),
  corrected_at          TEXT NOT NULL
);
CREATE INDEX correction_by_session ON rating_correction (session_id);

-- Rejected cells kept for correction (with --quarantine): excluded from analysis.
CREATE TABLE quarantine (
  id            INTEGER PRIMARY KEY,
  import_id     INTEGER NOT NULL REFERENCES import(id),
  panel_id      INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  file_name     TEXT NOT NULL,
  row_number    INTEGER,
  column_name   TEXT,
  session_label TEXT,
  session_date  TEXT,
  assessor      TEXT,
  product       TEXT,
  replicate     TEXT,
  attribute     TEXT,
  raw_value     TEXT,
  sample_code   TEXT,
  reason_code   TEXT NOT NULL,
  reason        TEXT NOT NULL,
  status        TEXT NOT NULL DEFAULT 'held' CHECK (status IN ('held', 'released', 'discarded')),
  resolved_at   TEXT,
  resolved_value REAL
);
CREATE INDEX quarantine_by_panel ON quarantine (panel_id, status);

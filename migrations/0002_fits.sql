-- Stored analysis results (issue 4): per-session fits and indices, period fits, data-quality
-- findings, the current flag set, panel events, retraining records, panel thresholds and
-- refit jobs. Every derived row records the data version(s) it was computed from, so a
-- re-import that changes nothing causes no refit, and a report can say what it is based on.

-- One REML fit per session × attribute (FitJson of domain/analysis.ts plus the fit diagnostics).
CREATE TABLE session_fit (
  session_id       INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  attribute_id     INTEGER NOT NULL REFERENCES attribute(id) ON DELETE CASCADE,
  data_version     INTEGER NOT NULL,
  analysis_version TEXT NOT NULL,
  fit_json         TEXT NOT NULL,
  diagnostics_json TEXT NOT NULL DEFAULT '{}',
  fitted_at        TEXT NOT NULL,
  PRIMARY KEY (session_id, attribute_id)
);

-- Per-assessor indices of one session × attribute: JSON array of AssessorSessionIndices.
CREATE TABLE session_indices (
  session_id       INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  attribute_id     INTEGER NOT NULL REFERENCES attribute(id) ON DELETE CASCADE,
  data_version     INTEGER NOT NULL,
  analysis_version TEXT NOT NULL,
  indices_json     TEXT NOT NULL,
  computed_at      TEXT NOT NULL,
  PRIMARY KEY (session_id, attribute_id)
);

-- Data-quality findings of one session (JSON array), recomputed with its fits.
CREATE TABLE session_quality (
  session_id       INTEGER PRIMARY KEY REFERENCES session(id) ON DELETE CASCADE,
  data_version     INTEGER NOT NULL,
  analysis_version TEXT NOT NULL,
  findings_json    TEXT NOT NULL,
  computed_at      TEXT NOT NULL
);

-- Period model of one attribute over a window of consecutive sessions ending at last_session_id.
-- sessions_json lists [label, data_version] pairs of the window: the fit is stale when it differs.
CREATE TABLE period_fit (
  id               INTEGER PRIMARY KEY,
  panel_id         INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  attribute_id     INTEGER NOT NULL REFERENCES attribute(id) ON DELETE CASCADE,
  window_sessions  INTEGER NOT NULL CHECK (window_sessions >= 2),
  first_session_id INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  last_session_id  INTEGER NOT NULL REFERENCES session(id) ON DELETE CASCADE,
  sessions_json    TEXT NOT NULL,
  analysis_version TEXT NOT NULL,
  result_json      TEXT NOT NULL,
  fitted_at        TEXT NOT NULL,
  UNIQUE (panel_id, attribute_id, window_sessions, last_session_id)
);

-- The current flag set of a panel. flag_key identifies "the same flag" across rebuilds
-- (kind|assessor|product|attribute|first_session) so review status and notes survive a refit.
CREATE TABLE flag (
  id               INTEGER PRIMARY KEY,
  panel_id         INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  flag_key         TEXT NOT NULL,
  kind             TEXT NOT NULL,
  assessor         TEXT,
  product          TEXT,
  attribute        TEXT,
  first_session    TEXT NOT NULL,
  severity         TEXT NOT NULL CHECK (severity IN ('watch', 'act')),
  evidence_json    TEXT NOT NULL,
  message          TEXT NOT NULL,
  -- current: produced by the latest flag build; a dismissed or closed flag that no longer
  -- fires is kept (current = 0) as review history.
  current          INTEGER NOT NULL DEFAULT 1 CHECK (current IN (0, 1)),
  status           TEXT NOT NULL DEFAULT 'open' CHECK (status IN ('open', 'dismissed', 'closed')),
  review_note      TEXT,
  reviewed_at      TEXT,
  first_seen_at    TEXT NOT NULL,
  data_signature   TEXT NOT NULL,
  UNIQUE (panel_id, flag_key)
);
CREATE INDEX flag_by_panel ON flag (panel_id, current, status);

-- When and from which data the current flag set was built.
CREATE TABLE flag_build (
  panel_id        INTEGER PRIMARY KEY REFERENCES panel(id) ON DELETE CASCADE,
  data_signature  TEXT NOT NULL,
  thresholds_hash TEXT NOT NULL,
  n_flags         INTEGER NOT NULL,
  built_at        TEXT NOT NULL
);

-- Things the panel leader marks: retraining, a new control batch (both restart baselines), notes.
CREATE TABLE panel_event (
  id            INTEGER PRIMARY KEY,
  panel_id      INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  kind          TEXT NOT NULL CHECK (kind IN ('retraining', 'control-batch', 'note')),
  -- the first session the event applies to
  session_label TEXT NOT NULL,
  assessor      TEXT,
  note          TEXT NOT NULL DEFAULT '',
  created_at    TEXT NOT NULL
);
CREATE INDEX panel_event_by_panel ON panel_event (panel_id, session_label);

-- Retraining planned or done for an assessor, linked to the flags that prompted it.
CREATE TABLE retraining (
  id            INTEGER PRIMARY KEY,
  panel_id      INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  assessor      TEXT NOT NULL,
  status        TEXT NOT NULL CHECK (status IN ('planned', 'done')),
  -- YYYY-MM-DD: the planned or actual date
  retraining_date TEXT NOT NULL,
  note          TEXT NOT NULL DEFAULT '',
  -- the evaluation after enough sessions (JSON from the improvement test), when made
  outcome_json  TEXT,
  created_at    TEXT NOT NULL,
  updated_at    TEXT NOT NULL
);
CREATE INDEX retraining_by_panel ON retraining (panel_id, assessor);

CREATE TABLE retraining_flag (
  retraining_id INTEGER NOT NULL REFERENCES retraining(id) ON DELETE CASCADE,
  flag_key      TEXT NOT NULL,
  PRIMARY KEY (retraining_id, flag_key)
);

-- Panel thresholds (the flag engine's settings object), validated in code before saving.
CREATE TABLE panel_thresholds (
  panel_id        INTEGER PRIMARY KEY REFERENCES panel(id) ON DELETE CASCADE,
  thresholds_json TEXT NOT NULL,
  updated_at      TEXT NOT NULL
);

-- Background refits started by the service or the CLI; the status is what the pages show.
CREATE TABLE refit_job (
  id           INTEGER PRIMARY KEY,
  panel_id     INTEGER NOT NULL REFERENCES panel(id) ON DELETE CASCADE,
  status       TEXT NOT NULL CHECK (status IN ('queued', 'running', 'done', 'failed')),
  reason       TEXT NOT NULL,
  n_tasks      INTEGER NOT NULL DEFAULT 0,
  n_done       INTEGER NOT NULL DEFAULT 0,
  message      TEXT,
  queued_at    TEXT NOT NULL,
  started_at   TEXT,
  finished_at  TEXT
);
CREATE INDEX refit_job_by_panel ON refit_job (panel_id, id);

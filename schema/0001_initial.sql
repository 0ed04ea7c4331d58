-- lphi schema, migration 1: sources, samples, readings, gaps.
--
-- Readings live in one table per kind, keyed by (source_id, seq) so that a
-- resent reading cannot be stored twice. WITHOUT ROWID keeps the key and the
-- row in one b-tree; the (source_id, t) index serves time-window queries.

CREATE TABLE sources (
  id   INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  kind TEXT NOT NULL CHECK (kind IN ('lockin', 'thermometer', 'field'))
);

CREATE TABLE samples (
  id                 INTEGER PRIMARY KEY,
  name               TEXT NOT NULL UNIQUE,
  model              TEXT NOT NULL CHECK (model IN ('hln2d', 'hln2d-so', 'wire1d', 'kawabata3d')),
  squares            REAL NOT NULL,
  width_m            REAL NOT NULL,
  thickness_m        REAL NOT NULL,
  excitation_a       REAL NOT NULL,
  lockin_source      TEXT NOT NULL,
  thermometer_source TEXT NOT NULL,
  field_source       TEXT NOT NULL,
  gain               REAL,
  diffusion_m2s      REAL,
  mean_free_path_m   REAL,
  alpha_fixed        REAL
);

CREATE TABLE lockin_readings (
  source_id       INTEGER NOT NULL REFERENCES sources(id),
  seq             INTEGER NOT NULL,
  t               REAL NOT NULL,
  x_v             REAL NOT NULL,
  y_v             REAL NOT NULL,
  frequency_hz    REAL,
  range_v         REAL,
  time_constant_s REAL,
  overload        INTEGER,
  PRIMARY KEY (source_id, seq)
) WITHOUT ROWID;
CREATE INDEX lockin_readings_by_time ON lockin_readings (source_id, t);

CREATE TABLE thermometer_readings (
  source_id      INTEGER NOT NULL REFERENCES sources(id),
  seq            INTEGER NOT NULL,
  t              REAL NOT NULL,
  temperature_k  REAL NOT NULL,
  resistance_ohm REAL,
  PRIMARY KEY (source_id, seq)
) WITHOUT ROWID;
CREATE INDEX thermometer_readings_by_time ON thermometer_readings (source_id, t);

CREATE TABLE field_readings (
  source_id INTEGER NOT NULL REFERENCES sources(id),
  seq       INTEGER NOT NULL,
  t         REAL NOT NULL,
  field_t   REAL NOT NULL,
  PRIMARY KEY (source_id, seq)
) WITHOUT ROWID;
CREATE INDEX field_readings_by_time ON field_readings (source_id, t);

-- A gap: sequence numbers first_seq..last_seq were missing when a later
-- reading arrived. Resends may fill it afterwards; the row stays as a record.
CREATE TABLE gaps (
  id          INTEGER PRIMARY KEY,
  source_id   INTEGER NOT NULL REFERENCES sources(id),
  first_seq   INTEGER NOT NULL,
  last_seq    INTEGER NOT NULL,
  detected_at REAL NOT NULL
);
CREATE INDEX gaps_by_source ON gaps (source_id, first_seq);

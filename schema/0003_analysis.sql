-- lphi schema, migration 3: what the live analysis found.
--
-- Written by lphid's analysis, through the store writer's thread (a task in
-- its transaction, in order with the readings). Times are event times (the
-- readings' own t, seconds since the Unix epoch), so that a replay of the
-- same readings writes the same rows. A sweep is identified by (sample_id, sweep_index): the index the
-- segmenter gave it, which is a function of the readings alone, so a restart
-- that re-segments the readings finds the rows it wrote before and reuses
-- their fits instead of fitting again.

-- One detected field sweep and the temperature during it.
CREATE TABLE sweeps (
  id                   INTEGER PRIMARY KEY,
  sample_id            INTEGER NOT NULL REFERENCES samples(id),
  sweep_index          INTEGER NOT NULL,
  direction            TEXT NOT NULL CHECK (direction IN ('up', 'down')),
  t_start              REAL NOT NULL,
  t_end                REAL NOT NULL,
  field_min_t          REAL NOT NULL,
  field_max_t          REAL NOT NULL,
  n_points             INTEGER NOT NULL,
  temperature_k        REAL NOT NULL,   -- mean over the sweep's points
  temperature_spread_k REAL NOT NULL,   -- sample standard deviation
  temperature_min_k    REAL NOT NULL,
  temperature_max_k    REAL NOT NULL,
  temperature_run      INTEGER NOT NULL, -- the segmenter's temperature run (plateau)
  temperature_unstable INTEGER NOT NULL CHECK (temperature_unstable IN (0, 1)),
  truncated            INTEGER NOT NULL CHECK (truncated IN (0, 1)),
  n_overload           INTEGER NOT NULL,
  max_quadrature_ratio REAL NOT NULL,   -- max |Y/X| over the sweep
  sample_voltage_v     REAL NOT NULL,   -- mean |X| / gain: the rms voltage across the sample
  excitation_ratio     REAL,            -- e V / (k_B T); NULL when it could not be formed
  UNIQUE (sample_id, sweep_index)
);
CREATE INDEX sweeps_by_sample ON sweeps (sample_id, t_end);

-- One fit per fitted sweep. With combine_up_down a fit covers two sweeps of
-- one plateau: it belongs to the later one, combined_with names the earlier.
-- result_json holds every key of the fit result (parameters, errors, window,
-- chi-square, termination, flags); the columns repeat the ones queried.
CREATE TABLE fits (
  id                INTEGER PRIMARY KEY,
  sweep_id          INTEGER NOT NULL UNIQUE REFERENCES sweeps(id),
  sample_id         INTEGER NOT NULL REFERENCES samples(id),
  combined_with     INTEGER REFERENCES sweeps(id),
  ok                INTEGER NOT NULL CHECK (ok IN (0, 1)),
  error             TEXT NOT NULL,     -- '' when ok
  model             TEXT NOT NULL,
  lphi_m            REAL,
  lphi_err_m        REAL,
  chi2_red          REAL,
  converged         INTEGER NOT NULL CHECK (converged IN (0, 1)),
  flags_json        TEXT NOT NULL,     -- JSON array of flag names
  temperature_k     REAL NOT NULL,
  temperature_spread_k REAL NOT NULL,
  sigma0_s          REAL,              -- robust sigma_sq(B = 0) of the sweep; NULL if not prepared
  sigma0_err_s      REAL,
  used_in_dephasing INTEGER NOT NULL CHECK (used_in_dephasing IN (0, 1)),
  quality_json      TEXT NOT NULL,     -- JSON array: why it is (not) usable
  result_json       TEXT NOT NULL,
  t                 REAL NOT NULL      -- event time: end of the (later) sweep
);
CREATE INDEX fits_by_sample ON fits (sample_id, t);

-- sigma(B = 0) per temperature plateau, from the fitted sweeps' sigma0, for
-- the zero-field electron thermometer. Rewritten as sweeps are added.
CREATE TABLE zero_field_points (
  sample_id       INTEGER NOT NULL REFERENCES samples(id),
  temperature_run INTEGER NOT NULL,
  temperature_k   REAL NOT NULL,
  sigma_s         REAL NOT NULL,
  sigma_err_s     REAL NOT NULL,
  n_sweeps        INTEGER NOT NULL,
  t               REAL NOT NULL,       -- event time of the last sweep in it
  PRIMARY KEY (sample_id, temperature_run)
) WITHOUT ROWID;

-- The L_phi(T) fit and the verdict after each update: one row per update,
-- keyed by the sweep whose fit triggered it. verdict_json is the whole reply
-- object of {"type":"verdict"}; the columns repeat the ones queried.
CREATE TABLE verdicts (
  id                INTEGER PRIMARY KEY,
  sample_id         INTEGER NOT NULL REFERENCES samples(id),
  sweep_index       INTEGER NOT NULL,
  t                 REAL NOT NULL,     -- event time of the update
  state             TEXT NOT NULL CHECK (state IN ('insufficient-data', 'power-law', 'saturating', 'saturated')),
  electrons_cooling INTEGER CHECK (electrons_cooling IN (0, 1)),
  likely_cause      TEXT,
  exponent_p        REAL,
  lphi_sat_m        REAL,
  t_sat_k           REAL,
  n_points          INTEGER NOT NULL,
  verdict_json      TEXT NOT NULL,
  UNIQUE (sample_id, sweep_index)
);
CREATE INDEX verdicts_by_sample ON verdicts (sample_id, t);

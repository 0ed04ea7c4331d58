-- lphi schema, migration 5: cooldowns.
--
-- A sample measured over weeks may be warmed up and cooled again; each
-- cooldown's L_phi(T), sigma(0) thermometer and verdict use only its own
-- sweeps (daemon/live/sample_pipeline.hpp, "Cooldowns"). The cooldown
-- (1, 2, ...) is recomputed from the readings by the analysis, like the
-- temperature run, and stored with each row. Rows written before this
-- migration belong to cooldown 1 until the analysis rewrites them.
ALTER TABLE sweeps ADD COLUMN cooldown INTEGER NOT NULL DEFAULT 1 CHECK (cooldown >= 1);
ALTER TABLE fits ADD COLUMN cooldown INTEGER NOT NULL DEFAULT 1 CHECK (cooldown >= 1);
ALTER TABLE zero_field_points ADD COLUMN cooldown INTEGER NOT NULL DEFAULT 1 CHECK (cooldown >= 1);
ALTER TABLE verdicts ADD COLUMN cooldown INTEGER NOT NULL DEFAULT 1 CHECK (cooldown >= 1);

-- lphi schema, migration 4: the alerts and every change of their state.
--
-- Written by lphid's alert engine, through the store writer's thread. An alert is
-- one (rule, subject) from the moment it is raised until it is cleared; at
-- most one alert per (rule, subject) is live (not cleared) at a time, and a
-- condition that returns after a clear is a new alert (a new id).
-- raised_at, cleared_at and alert_events.t are the times of the facts that
-- caused them: event time for rules that judge the readings (so a replay
-- writes the same rows), wall time for the health rules and for
-- acknowledgements. alert_events.wall_time is always the wall clock.

CREATE TABLE alerts (
  id          INTEGER PRIMARY KEY,
  rule        TEXT NOT NULL,
  subject     TEXT NOT NULL,           -- sample or source name, '' for lphid itself
  severity    TEXT NOT NULL CHECK (severity IN ('info', 'warning', 'critical')),
  state       TEXT NOT NULL CHECK (state IN ('raised', 'acknowledged', 'cleared')),
  raised_at   REAL NOT NULL,
  acked_at    REAL,
  cleared_at  REAL,
  value       REAL,                    -- the value that raised it, then the latest one
  count       INTEGER NOT NULL DEFAULT 1,  -- how many observations triggered it
  good_count  INTEGER NOT NULL DEFAULT 0,  -- consecutive good observations since (toward clear_after)
  message     TEXT NOT NULL,
  context     TEXT NOT NULL            -- JSON: the facts behind it
);

-- The live alerts, one per (rule, subject).
CREATE UNIQUE INDEX alerts_live ON alerts(rule, subject) WHERE state != 'cleared';

-- Every change: raised, updated (re-triggered), acknowledged, cleared.
CREATE TABLE alert_events (
  id        INTEGER PRIMARY KEY,
  alert_id  INTEGER NOT NULL REFERENCES alerts(id),
  change    TEXT NOT NULL CHECK (change IN ('raised', 'updated', 'acknowledged', 'cleared')),
  t         REAL NOT NULL,
  wall_time REAL NOT NULL,
  value     REAL,
  context   TEXT NOT NULL
);
CREATE INDEX alert_events_alert ON alert_events(alert_id);

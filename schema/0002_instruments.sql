-- lphi schema, migration 2: what the instruments that lphid's drivers talk to
-- say they are.
--
-- One row per (source, identity): the answer to the driver's identity query
-- (*IDN? for scpi-tcp), when it was first and last given. A changed answer
-- (another instrument plugged into the same address, new firmware) starts a
-- new row, so the history of what produced a source's readings is kept.

CREATE TABLE instrument_identities (
  source_id  INTEGER NOT NULL REFERENCES sources(id),
  identity   TEXT NOT NULL,
  first_seen REAL NOT NULL,
  last_seen  REAL NOT NULL,
  PRIMARY KEY (source_id, identity)
) WITHOUT ROWID;

-- A database in the store's schema version 2 (before sessions recorded their owner): the
-- version-1 fixture with the 1 -> 2 columns added, and one more invented session left running
-- (no owner, as version 2 wrote it). test_store checks the 2 -> 3 migration on it. Load from the
-- repository root (the .read path is relative).
.read tests/data/store_v1.sql
ALTER TABLE sessions ADD COLUMN observer TEXT;
ALTER TABLE sessions ADD COLUMN screen_width_cm REAL;
ALTER TABLE sessions ADD COLUMN screen_height_cm REAL;
ALTER TABLE sessions ADD COLUMN screen_width_px INTEGER;
ALTER TABLE sessions ADD COLUMN screen_height_px INTEGER;
ALTER TABLE sessions ADD COLUMN distance_cm REAL;
ALTER TABLE sessions ADD COLUMN nominal_hz REAL;
ALTER TABLE sessions ADD COLUMN stim_deg REAL;
ALTER TABLE trials ADD COLUMN anticipation INTEGER NOT NULL DEFAULT 0;
ALTER TABLE trials ADD COLUMN key_sdl_ms INTEGER;
ALTER TABLE trials ADD COLUMN level_requested REAL;
ALTER TABLE trials ADD COLUMN repeat_of INTEGER;
CREATE INDEX IF NOT EXISTS sessions_subject ON sessions(subject, started_utc);
INSERT INTO sessions (id, subject, seed, started_utc, status, observer)
 VALUES ('7a6b5c4d-3e2f-4a1b-9c8d-7e6f5a4b3c2d', 'OLD2', 7, '2026-01-02T10:00:00Z', 'running',
         'keyboard');
PRAGMA user_version = 2;

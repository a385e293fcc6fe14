-- A database in the store's schema version 1 (the first layout), with one invented session of
-- three trials. tests/e2e/merge.sh loads it with the sqlite3 shell and checks that tachist
-- migrates it on open (and reads it through a migrated copy when merging).
PRAGMA journal_mode = WAL;
CREATE TABLE sessions (
 id TEXT PRIMARY KEY NOT NULL,
 subject TEXT NOT NULL,
 protocol_name TEXT, protocol_path TEXT, protocol_text TEXT, protocol_sha256 TEXT,
 stimuli_path TEXT, stimuli_sha256 TEXT, rig_text TEXT,
 seed INTEGER NOT NULL,
 version TEXT, timing_mode TEXT, refresh_hz REAL,
 started_utc TEXT NOT NULL, ended_utc TEXT,
 status TEXT NOT NULL CHECK (status IN ('running','complete','aborted','interrupted')),
 choices TEXT, label_names TEXT);
CREATE TABLE trials (
 session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
 trial INTEGER NOT NULL,
 block INTEGER NOT NULL, block_name TEXT, block_trial INTEGER NOT NULL,
 practice INTEGER NOT NULL DEFAULT 0,
 stim INTEGER, image TEXT, category TEXT, choice INTEGER, level REAL, source TEXT,
 labels TEXT,
 response_key TEXT, response INTEGER, response_category TEXT, correct INTEGER,
 rt_ms REAL, timed_out INTEGER NOT NULL DEFAULT 0,
 frames_planned INTEGER, frames_actual INTEGER, dropped_frames INTEGER,
 timing_ok INTEGER, onset_ns INTEGER, offset_ns INTEGER, start_ns INTEGER,
 staircase INTEGER,
 PRIMARY KEY (session_id, trial)) WITHOUT ROWID;
CREATE TABLE frames (
 session_id TEXT NOT NULL, trial INTEGER NOT NULL, n INTEGER NOT NULL, flips BLOB,
 PRIMARY KEY (session_id, trial),
 FOREIGN KEY (session_id, trial) REFERENCES trials(session_id, trial) ON DELETE CASCADE
) WITHOUT ROWID;
CREATE TABLE events (
 session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
 seq INTEGER NOT NULL, mono_ns INTEGER, kind TEXT NOT NULL, detail TEXT,
 PRIMARY KEY (session_id, seq)) WITHOUT ROWID;
INSERT INTO sessions VALUES ('0f1e2d3c-4b5a-4968-8776-a5b4c3d2e1f0', 'OLD1', 'oldproto',
 'protocols/old.ini', '[old]', NULL, 'old.csv', NULL, '[screen]', 42, '0.0.9', 'simulated', 60.0,
 '2026-11-02T09:00:00.000Z', '2026-11-02T09:10:00.000Z', 'complete',
 '[{"category":"cat","key":"f"},{"category":"dog","key":"j"}]', '["set"]');
INSERT INTO trials VALUES ('0f1e2d3c-4b5a-4968-8776-a5b4c3d2e1f0', 0, 0, 'main', 0, 0, 0,
 'a.png', 'cat', 0, 0.1, NULL, '["A"]', 'f', 0, 'cat', 1, 512.5, 0, 12, 12, 0, 1,
 1000000000, 1200000000, 500000000, NULL);
INSERT INTO trials VALUES ('0f1e2d3c-4b5a-4968-8776-a5b4c3d2e1f0', 1, 0, 'main', 1, 0, 1,
 'b.png', 'dog', 1, 0.2, NULL, '["B"]', 'f', 0, 'cat', 0, 498.0, 0, 12, 12, 0, 1,
 3000000000, 3200000000, 2500000000, NULL);
INSERT INTO trials VALUES ('0f1e2d3c-4b5a-4968-8776-a5b4c3d2e1f0', 2, 0, 'main', 2, 0, 0,
 'a.png', 'cat', 0, 0.1, NULL, '["A"]', NULL, NULL, NULL, NULL, NULL, 1, 12, 12, 0, 1,
 5000000000, 5200000000, 4500000000, NULL);
INSERT INTO events VALUES ('0f1e2d3c-4b5a-4968-8776-a5b4c3d2e1f0', 0, 100, 'block_start', 'main');
PRAGMA user_version = 1;

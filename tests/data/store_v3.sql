-- A database in the store's schema version 3 (before the application id, the ended-early status,
-- the planned trial count and the response clock): the version-3 tables as that version created
-- them, and invented sessions: one complete with three trials (labels, a missed response, a
-- repeat), one aborted with a frame blob and events, one left running with an owner.
-- test_store checks the 3 -> 4 migration on it. Load from the repository root.
CREATE TABLE sessions ( id TEXT PRIMARY KEY NOT NULL, subject TEXT NOT NULL, protocol_name TEXT, protocol_path TEXT, protocol_text TEXT, protocol_sha256 TEXT, stimuli_path TEXT, stimuli_sha256 TEXT, rig_text TEXT, seed INTEGER NOT NULL, version TEXT, timing_mode TEXT, refresh_hz REAL, started_utc TEXT NOT NULL, ended_utc TEXT, status TEXT NOT NULL CHECK (status IN ('running','complete','aborted','interrupted')), choices TEXT, label_names TEXT, observer TEXT, screen_width_cm REAL, screen_height_cm REAL, screen_width_px INTEGER, screen_height_px INTEGER, distance_cm REAL, nominal_hz REAL, stim_deg REAL, owner_pid INTEGER, owner_host TEXT);
CREATE INDEX sessions_subject ON sessions(subject, started_utc);
CREATE TABLE trials ( session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE, trial INTEGER NOT NULL, block INTEGER NOT NULL, block_name TEXT, block_trial INTEGER NOT NULL, practice INTEGER NOT NULL DEFAULT 0, stim INTEGER, image TEXT, category TEXT, choice INTEGER, level REAL, source TEXT, labels TEXT, response_key TEXT, response INTEGER, response_category TEXT, correct INTEGER, rt_ms REAL, timed_out INTEGER NOT NULL DEFAULT 0, frames_planned INTEGER, frames_actual INTEGER, dropped_frames INTEGER, timing_ok INTEGER, onset_ns INTEGER, offset_ns INTEGER, start_ns INTEGER, staircase INTEGER, anticipation INTEGER NOT NULL DEFAULT 0, key_sdl_ms INTEGER, level_requested REAL, repeat_of INTEGER, PRIMARY KEY (session_id, trial)) WITHOUT ROWID;
CREATE TABLE frames ( session_id TEXT NOT NULL, trial INTEGER NOT NULL, n INTEGER NOT NULL, flips BLOB, PRIMARY KEY (session_id, trial), FOREIGN KEY (session_id, trial) REFERENCES trials(session_id, trial) ON DELETE CASCADE) WITHOUT ROWID;
CREATE TABLE events ( session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE, seq INTEGER NOT NULL, mono_ns INTEGER, kind TEXT NOT NULL, detail TEXT, PRIMARY KEY (session_id, seq)) WITHOUT ROWID;

INSERT INTO sessions (id, subject, protocol_name, seed, version, timing_mode, started_utc,
 ended_utc, status, choices, label_names, observer, distance_cm, owner_pid, owner_host)
 VALUES ('3c3c3c3c-1111-4222-8333-444455556666', 'V3A', 'oldproto', 11, '0.3', 'simulated',
 '2026-03-01T09:00:00.000Z', '2026-03-01T09:10:00.000Z', 'complete',
 '[{"category":"cat","key":"f"},{"category":"dog","key":"j"}]', '["set","note"]', 'keyboard',
 57, 4242, 'benchhost');
INSERT INTO trials (session_id, trial, block, block_name, block_trial, practice, stim, image,
 category, choice, level, source, labels, response_key, response, response_category, correct,
 rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns, offset_ns,
 start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of) VALUES
 ('3c3c3c3c-1111-4222-8333-444455556666', 0, 0, 'warmup', 0, 1, 0, 'a.png', 'cat', 0, 0.25,
  'a0.png', '["s1","first, with comma"]', 'f', 0, 'cat', 1, 512.5, 0, 3, 3, 0, 1, 1000000000,
  1050000000, 900000000, NULL, 0, 1234, NULL, NULL),
 ('3c3c3c3c-1111-4222-8333-444455556666', 1, 1, 'main', 0, 0, 1, 'b.png', 'dog', 1, NULL,
  'b0.png', '["s2",""]', NULL, NULL, NULL, NULL, NULL, 1, 3, 4, 1, 0, 2000000000, 2066000000,
  1900000000, 0, 0, NULL, 0.5, NULL),
 ('3c3c3c3c-1111-4222-8333-444455556666', 2, 1, 'main', 1, 0, 1, 'b.png', 'dog', 1, NULL,
  'b0.png', '["s2",""]', 'j', 1, 'dog', 1, 401.25, 0, 3, 3, 0, 1, 3000000000, 3050000000,
  2900000000, NULL, 0, 77, NULL, 1);
INSERT INTO sessions (id, subject, protocol_name, seed, started_utc, ended_utc, status,
 owner_pid, owner_host)
 VALUES ('3c3c3c3c-2222-4222-8333-444455556666', 'V3B', 'oldproto', 12,
 '2026-03-02T09:00:00.000Z', '2026-03-02T09:01:00.000Z', 'aborted', 4243, 'benchhost');
INSERT INTO trials (session_id, trial, block, block_trial, stim, image, category, choice,
 response_key, response, response_category, correct, rt_ms, frames_planned, frames_actual,
 dropped_frames, timing_ok, onset_ns, offset_ns, start_ns) VALUES
 ('3c3c3c3c-2222-4222-8333-444455556666', 0, 0, 0, 0, 'a.png', 'cat', 0, 'j', 1, 'dog', 0,
  300, 3, 3, 0, 1, 5000000000, 5050000000, 4900000000);
INSERT INTO frames (session_id, trial, n, flips) VALUES
 ('3c3c3c3c-2222-4222-8333-444455556666', 0, 2, X'00F2052A0100000080F4052A01000000');
INSERT INTO events (session_id, seq, mono_ns, kind, detail) VALUES
 ('3c3c3c3c-2222-4222-8333-444455556666', 0, 10, 'block_start', '0'),
 ('3c3c3c3c-2222-4222-8333-444455556666', 1, 20, 'abort', 'disk full');
INSERT INTO sessions (id, subject, seed, started_utc, status, owner_pid, owner_host)
 VALUES ('3c3c3c3c-3333-4222-8333-444455556666', 'V3C', 13, '2026-03-03T09:00:00.000Z',
 'running', 999999, 'otherhost');
PRAGMA user_version = 3;

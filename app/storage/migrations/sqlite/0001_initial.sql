-- Sessions (workshop state as JSON and its revision), key digests, the event log
-- and per-session JSON values. IF NOT EXISTS: files made before versioned
-- migrations already hold exactly these tables and are adopted as version 1.
CREATE TABLE IF NOT EXISTS sessions (
    id        TEXT PRIMARY KEY,
    title     TEXT NOT NULL,
    join_code TEXT NOT NULL UNIQUE,
    created   REAL NOT NULL,
    updated   REAL NOT NULL,
    revision  INTEGER NOT NULL,
    state     TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS tokens (
    token_hash TEXT PRIMARY KEY,
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    member_id  TEXT NOT NULL,
    created    REAL NOT NULL
);
CREATE TABLE IF NOT EXISTS events (
    seq        INTEGER PRIMARY KEY AUTOINCREMENT,
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    revision   INTEGER NOT NULL,
    at         REAL NOT NULL,
    actor      TEXT,
    kind       TEXT NOT NULL,
    data       TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS tokens_by_member ON tokens(member_id);
CREATE INDEX IF NOT EXISTS events_by_session ON events(session_id, revision);
CREATE TABLE IF NOT EXISTS attachments (
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    key        TEXT NOT NULL,
    value      TEXT NOT NULL,
    updated    REAL NOT NULL,
    PRIMARY KEY (session_id, key)
);

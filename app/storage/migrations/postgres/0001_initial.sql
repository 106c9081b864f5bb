-- Sessions (workshop state as JSON text, kept byte for byte, and its revision),
-- key digests, the event log and per-session JSON values.
CREATE TABLE sessions (
    id        TEXT PRIMARY KEY,
    title     TEXT NOT NULL,
    join_code TEXT NOT NULL UNIQUE,
    created   DOUBLE PRECISION NOT NULL,
    updated   DOUBLE PRECISION NOT NULL,
    revision  INTEGER NOT NULL,
    state     TEXT NOT NULL
);
CREATE TABLE tokens (
    token_hash TEXT PRIMARY KEY,
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    member_id  TEXT NOT NULL,
    created    DOUBLE PRECISION NOT NULL
);
CREATE TABLE events (
    seq        BIGINT GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    revision   INTEGER NOT NULL,
    at         DOUBLE PRECISION NOT NULL,
    actor      TEXT,
    kind       TEXT NOT NULL,
    data       TEXT NOT NULL
);
CREATE INDEX tokens_by_member ON tokens(member_id);
CREATE INDEX events_by_session ON events(session_id, revision);
CREATE TABLE attachments (
    session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
    key        TEXT NOT NULL,
    value      TEXT NOT NULL,
    updated    DOUBLE PRECISION NOT NULL,
    PRIMARY KEY (session_id, key)
);

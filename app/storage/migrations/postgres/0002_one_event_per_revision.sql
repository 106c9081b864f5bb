-- The database itself refuses a second event with a revision the session already
-- logged: two writers can never both record revision n.
DROP INDEX IF EXISTS events_by_session;
CREATE UNIQUE INDEX events_one_per_revision ON events(session_id, revision);

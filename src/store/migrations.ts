/**
 * The SQLite schema, one entry per version, applied in order and never edited once released:
 * a change is a new entry. PRAGMA user_version holds the version a file has reached.
 */
export const MIGRATIONS: string[] = [
  // 1: channels, samples in chunks, checkpoints, window marks, events, test points and records.
  `
  CREATE TABLE channels (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE,
    unit TEXT,
    created_ms REAL NOT NULL
  );
  -- Samples of one channel committed in one flush: times (epoch ms) and values as little-endian
  -- float64 arrays; seq is the channel's 0-based sample index of the first one.
  CREATE TABLE sample_chunks (
    channel_id INTEGER NOT NULL REFERENCES channels(id),
    first_seq INTEGER NOT NULL,
    count INTEGER NOT NULL,
    first_ms REAL NOT NULL,
    last_ms REAL NOT NULL,
    times BLOB NOT NULL,
    vals BLOB NOT NULL,
    PRIMARY KEY (channel_id, first_seq)
  ) WITHOUT ROWID;
  -- The pipeline's whole state after sample seq - 1 (v8 serialisation of plain data).
  CREATE TABLE checkpoints (
    channel_id INTEGER PRIMARY KEY REFERENCES channels(id),
    seq INTEGER NOT NULL,
    created_ms REAL NOT NULL,
    state BLOB NOT NULL
  );
  -- Control marks replayed at their sample index (a growing window restarting for a test point).
  CREATE TABLE marks (
    channel_id INTEGER NOT NULL REFERENCES channels(id),
    seq INTEGER NOT NULL,
    kind TEXT NOT NULL,
    PRIMARY KEY (channel_id, seq, kind)
  ) WITHOUT ROWID;
  CREATE TABLE events (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    time_ms REAL NOT NULL,
    source TEXT NOT NULL,
    kind TEXT NOT NULL,
    at INTEGER,
    body TEXT NOT NULL
  );
  CREATE INDEX events_source ON events(source, id);
  CREATE TABLE test_points (
    id TEXT PRIMARY KEY,
    body TEXT NOT NULL,
    updated_ms REAL NOT NULL
  );
  CREATE TABLE records (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    test_point_id TEXT NOT NULL,
    created_ms REAL NOT NULL,
    body TEXT NOT NULL
  );
  CREATE INDEX records_test_point ON records(test_point_id, id);
  CREATE TABLE counters (
    key TEXT PRIMARY KEY,
    value REAL NOT NULL
  );
  `,
  // 2: which samples carried no time of their own (a bitmap per chunk, NULL when all did), so a
  // restart replays them through the same time policy; the committed position of durable sources.
  `
  ALTER TABLE sample_chunks ADD COLUMN unstamped BLOB;
  CREATE TABLE source_positions (
    source TEXT PRIMARY KEY,
    sequence INTEGER NOT NULL,
    updated_ms REAL NOT NULL
  );
  `,
  // 3: what ingest knows beyond the channels, committed with the samples it concerns: the Sparkplug
  // B state of each edge node, each channel's gap detector (keys named by their owner).
  `
  CREATE TABLE ingest_state (
    key TEXT PRIMARY KEY,
    body TEXT NOT NULL
  );
  `,
];

"""The tables and triggers of the embedded store's SQLite file (:mod:`.sqlite_backend`).

Result bytes are counted by triggers in one ``stats`` row, in the same transactions as
the rows themselves, so the count survives crashes too.
"""

from __future__ import annotations

import sqlite3

SCHEMA_VERSION = "1"

SCHEMA = """
CREATE TABLE IF NOT EXISTS info (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS results (
    id INTEGER PRIMARY KEY,
    tenant TEXT NOT NULL,
    digest TEXT NOT NULL,
    size INTEGER NOT NULL,
    created REAL NOT NULL,
    used REAL NOT NULL,
    value BLOB NOT NULL,
    UNIQUE (tenant, digest)
);
CREATE INDEX IF NOT EXISTS results_used ON results (used);
CREATE TABLE IF NOT EXISTS aliases (
    tenant TEXT NOT NULL,
    body TEXT NOT NULL,
    digest TEXT NOT NULL,
    PRIMARY KEY (tenant, body)
);
CREATE INDEX IF NOT EXISTS aliases_digest ON aliases (tenant, digest);
CREATE TABLE IF NOT EXISTS stats (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    bytes INTEGER NOT NULL,
    entries INTEGER NOT NULL
);
INSERT OR IGNORE INTO stats VALUES (1, 0, 0);
CREATE TRIGGER IF NOT EXISTS results_added AFTER INSERT ON results BEGIN
    UPDATE stats SET bytes = bytes + new.size, entries = entries + 1 WHERE id = 1;
END;
CREATE TRIGGER IF NOT EXISTS results_resized AFTER UPDATE OF size ON results BEGIN
    UPDATE stats SET bytes = bytes - old.size + new.size WHERE id = 1;
END;
CREATE TRIGGER IF NOT EXISTS results_removed AFTER DELETE ON results BEGIN
    UPDATE stats SET bytes = bytes - old.size, entries = entries - 1 WHERE id = 1;
    DELETE FROM aliases WHERE tenant = old.tenant AND digest = old.digest;
END;
CREATE TABLE IF NOT EXISTS networks (
    tenant TEXT NOT NULL,
    name TEXT NOT NULL,
    version INTEGER NOT NULL,
    etag TEXT NOT NULL,
    digest TEXT NOT NULL,
    node_count INTEGER NOT NULL,
    arc_count INTEGER NOT NULL,
    size INTEGER NOT NULL,
    created REAL NOT NULL,
    updated REAL NOT NULL,
    blob BLOB NOT NULL,
    PRIMARY KEY (tenant, name)
);
"""


def create_schema(conn: sqlite3.Connection) -> None:
    """Create the tables and triggers a new database lacks, and record the schema version."""
    for statement in _statements(SCHEMA):
        conn.execute(statement)
    conn.execute("INSERT OR IGNORE INTO info VALUES ('schema', ?)", (SCHEMA_VERSION,))


def _statements(script: str) -> list[str]:
    """Split the schema script on ';' outside trigger bodies."""
    out, buf, depth = [], [], 0
    for line in script.strip().splitlines():
        buf.append(line)
        stripped = line.strip().upper()
        if stripped.endswith("BEGIN"):
            depth += 1
        if stripped == "END;":
            depth -= 1
        if depth == 0 and stripped.endswith(";"):
            out.append("\n".join(buf))
            buf = []
    return out

-- PRAGMA user_version = 5
-- PRAGMA application_id = 1381189697
-- index qualitative_by_lab
CREATE INDEX qualitative_by_lab ON qualitative (lab, measurand);
-- index scores_by_lab
CREATE INDEX scores_by_lab ON scores (lab, measurand);
-- index sqlite_autoindex_investigations_1
-- (made by SQLite)
-- index sqlite_autoindex_laboratories_1
-- (made by SQLite)
-- index sqlite_autoindex_qualitative_1
-- (made by SQLite)
-- index sqlite_autoindex_round_tables_1
-- (made by SQLite)
-- index sqlite_autoindex_rounds_1
-- (made by SQLite)
-- index sqlite_autoindex_scores_1
-- (made by SQLite)
-- table audit
CREATE TABLE audit (
        id INTEGER PRIMARY KEY, replaced_at TEXT NOT NULL, reason TEXT NOT NULL,
        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT, kind TEXT NOT NULL,
        row TEXT NOT NULL);
-- table investigations
CREATE TABLE investigations (
        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT NOT NULL, measurand TEXT NOT NULL,
        status TEXT NOT NULL, cause TEXT NOT NULL DEFAULT '', action TEXT NOT NULL DEFAULT '',
        by_name TEXT NOT NULL, recorded_on TEXT NOT NULL, stored_at TEXT NOT NULL,
        PRIMARY KEY (scheme, round_id, lab, measurand));
-- table laboratories
CREATE TABLE laboratories (
        scheme TEXT NOT NULL, lab TEXT NOT NULL, name TEXT NOT NULL, stored_at TEXT NOT NULL,
        PRIMARY KEY (scheme, lab));
-- table qualitative
CREATE TABLE qualitative (
        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT NOT NULL, measurand TEXT NOT NULL,
        item TEXT NOT NULL DEFAULT '', reported TEXT, assigned TEXT, agreement TEXT,
        deviation INTEGER, signal TEXT, note TEXT,
        PRIMARY KEY (scheme, round_id, lab, measurand, item),
        FOREIGN KEY (scheme, round_id) REFERENCES rounds (scheme, round_id));
-- table round_tables
CREATE TABLE round_tables (
        scheme TEXT NOT NULL, round_id TEXT NOT NULL, kind TEXT NOT NULL,
        position INTEGER NOT NULL, row TEXT NOT NULL,
        PRIMARY KEY (scheme, round_id, kind, position));
-- table rounds
CREATE TABLE rounds (
        scheme TEXT NOT NULL, round_id TEXT NOT NULL, round_date TEXT NOT NULL,
        title TEXT NOT NULL DEFAULT '', settings TEXT NOT NULL DEFAULT '{}',
        stored_at TEXT NOT NULL, origin TEXT NOT NULL DEFAULT 'lab', PRIMARY KEY (scheme, round_id));
-- table schema_version
CREATE TABLE schema_version (version INTEGER PRIMARY KEY, applied_at TEXT NOT NULL, description TEXT);
-- table scores
CREATE TABLE scores (scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT, measurand TEXT, unit TEXT, n_replicates INTEGER, result REAL, assigned REAL, u_assigned REAL, sigma_pt REAL, z REAL, z_prime REAL, zeta REAL, en REAL, d REAL, d_percent REAL, signal TEXT, note TEXT, score TEXT,
        PRIMARY KEY (scheme, round_id, lab, measurand),
        FOREIGN KEY (scheme, round_id) REFERENCES rounds (scheme, round_id));

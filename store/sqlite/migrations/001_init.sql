-- tpcscan store, version 1. Times are UTC RFC 3339 text with microseconds.

CREATE TABLE campaigns (
	id             INTEGER PRIMARY KEY,
	name           TEXT    NOT NULL UNIQUE,
	dataset        TEXT    NOT NULL,
	mode           TEXT    NOT NULL CHECK (mode IN ('label', 'verify')),
	per_event      INTEGER NOT NULL CHECK (per_event >= 1),
	blind          INTEGER NOT NULL,
	adaptive       INTEGER NOT NULL,
	seed           INTEGER NOT NULL,
	schema_json    TEXT    NOT NULL, -- frozen at creation
	schema_version INTEGER NOT NULL,
	instructions   TEXT    NOT NULL,
	scanners       TEXT    NOT NULL, -- JSON array; empty = anyone may join
	n_events       INTEGER NOT NULL,
	created        TEXT    NOT NULL
);

-- One row per event of a campaign. pos is the event's place on the shuffled
-- ring; a scanner reads the ring from an offset of their own. needed is how
-- many passes the event wants (K, plus adaptive or skip replacements), taken
-- how many have been handed out.
CREATE TABLE events (
	campaign_id  INTEGER NOT NULL REFERENCES campaigns (id),
	event_id     TEXT    NOT NULL,
	ord          INTEGER NOT NULL, -- order given at creation
	pos          INTEGER NOT NULL,
	needed       INTEGER NOT NULL,
	taken        INTEGER NOT NULL DEFAULT 0,
	extra_round  INTEGER NOT NULL DEFAULT 1, -- round of passes beyond K
	adaptive_added INTEGER NOT NULL DEFAULT 0,
	selection    TEXT, -- JSON scan.Selection, or NULL
	PRIMARY KEY (campaign_id, event_id)
);
CREATE UNIQUE INDEX events_ord ON events (campaign_id, ord);
CREATE INDEX events_open ON events (campaign_id, pos) WHERE taken < needed;
CREATE INDEX events_open_extra ON events (campaign_id, pos) WHERE taken < needed AND extra_round > 1;

CREATE TABLE revisions (
	id             INTEGER PRIMARY KEY,
	pass_id        INTEGER NOT NULL REFERENCES passes (id),
	seq            INTEGER NOT NULL,
	state          TEXT    NOT NULL CHECK (state IN ('draft', 'submitted', 'skipped')),
	label          TEXT    NOT NULL, -- JSON scan.Label
	seconds        REAL    NOT NULL,
	at             TEXT    NOT NULL,
	schema_version INTEGER NOT NULL,
	UNIQUE (pass_id, seq)
);

-- A pass is one scanner's work on one event; its state and latest_revision
-- move forward in the same transaction that appends a revision.
CREATE TABLE passes (
	id              INTEGER PRIMARY KEY,
	campaign_id     INTEGER NOT NULL,
	event_id        TEXT    NOT NULL,
	scanner         TEXT    NOT NULL,
	round           INTEGER NOT NULL,
	state           TEXT    NOT NULL CHECK (state IN ('assigned', 'draft', 'submitted', 'skipped')),
	assigned        TEXT    NOT NULL,
	updated         TEXT    NOT NULL,
	seconds         REAL    NOT NULL DEFAULT 0,
	revisions       INTEGER NOT NULL DEFAULT 0,
	latest_revision INTEGER REFERENCES revisions (id),
	FOREIGN KEY (campaign_id, event_id) REFERENCES events (campaign_id, event_id),
	UNIQUE (campaign_id, event_id, scanner)
);
CREATE INDEX passes_scanner ON passes (campaign_id, scanner, id);
CREATE INDEX passes_open ON passes (campaign_id, scanner, id) WHERE state IN ('assigned', 'draft');

-- Revisions are append-only: the database itself refuses to change them.
CREATE TRIGGER revisions_no_update BEFORE UPDATE ON revisions
BEGIN
	SELECT RAISE(ABORT, 'revisions are append-only');
END;
CREATE TRIGGER revisions_no_delete BEFORE DELETE ON revisions
BEGIN
	SELECT RAISE(ABORT, 'revisions are append-only');
END;

CREATE TABLE consensus (
	id          INTEGER PRIMARY KEY,
	campaign_id INTEGER NOT NULL,
	event_id    TEXT    NOT NULL,
	method      TEXT    NOT NULL,
	label       TEXT    NOT NULL,
	posterior   REAL    NOT NULL,
	decided_by  TEXT    NOT NULL,
	at          TEXT    NOT NULL,
	FOREIGN KEY (campaign_id, event_id) REFERENCES events (campaign_id, event_id)
);
CREATE INDEX consensus_event ON consensus (campaign_id, event_id, id);

CREATE TABLE resume (
	campaign_id INTEGER NOT NULL REFERENCES campaigns (id),
	scanner     TEXT    NOT NULL,
	state       BLOB    NOT NULL,
	updated     TEXT    NOT NULL,
	PRIMARY KEY (campaign_id, scanner)
);

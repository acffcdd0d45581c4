-- A cyanorisk store of schema version 1 (sqlite): the tables as the first schema defined them
-- (JSON and times as text, runs without an owner), with rows: two ingested files, three runs (the
-- last left 'running' by a process that stopped), two revisions of one report. Times partly with a
-- +11:00 offset, as an older service wrote them. Statements end with a semicolon at the end of a line.

CREATE TABLE ingested_files (
	id INTEGER NOT NULL,
	site_id VARCHAR(128) NOT NULL,
	path TEXT NOT NULL,
	sha256 VARCHAR(64) NOT NULL,
	rows TEXT NOT NULL,
	ingested_at VARCHAR(40) NOT NULL,
	PRIMARY KEY (id),
	UNIQUE (site_id, path, sha256)
);

CREATE TABLE meta (
	"key" VARCHAR(64) NOT NULL,
	value TEXT NOT NULL,
	PRIMARY KEY ("key")
);

CREATE TABLE reports (
	id INTEGER NOT NULL,
	site_id VARCHAR(128) NOT NULL,
	as_of VARCHAR(10) NOT NULL,
	revision INTEGER NOT NULL,
	status VARCHAR(32) NOT NULL,
	level_rank INTEGER,
	level TEXT,
	probabilities TEXT NOT NULL,
	model_version TEXT,
	thresholds TEXT NOT NULL,
	fingerprint VARCHAR(64) NOT NULL,
	inputs TEXT NOT NULL,
	paths TEXT NOT NULL,
	reason TEXT NOT NULL,
	issued_at VARCHAR(40) NOT NULL,
	run_id INTEGER,
	PRIMARY KEY (id),
	UNIQUE (site_id, as_of, revision)
);

CREATE TABLE runs (
	id INTEGER NOT NULL,
	as_of VARCHAR(10) NOT NULL,
	started_at VARCHAR(40) NOT NULL,
	ended_at VARCHAR(40),
	status VARCHAR(32) NOT NULL,
	error TEXT,
	PRIMARY KEY (id)
);

INSERT INTO meta ("key", value) VALUES ('schema_version', '1');
INSERT INTO ingested_files (id, site_id, path, sha256, rows, ingested_at) VALUES
  (1, 'tallowbark', '/data/tallowbark/weather/tallowbark_aws_2024.txt', 'cdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcd',
   '{"read": 17520, "kept": 17500, "duplicates_identical": 12, "rejected": 8}', '2024-12-04T19:00:01+00:00'),
  (2, 'tallowbark', '/data/tallowbark/samples/tallowbark_counts.csv', '1212121212121212121212121212121212121212121212121212121212121212',
   '{"read": 96, "kept": 95}', '2024-12-05T06:00:02+11:00');
INSERT INTO runs (id, as_of, started_at, ended_at, status, error) VALUES
  (1, '2024-12-05', '2024-12-04T19:00:00+00:00', '2024-12-04T19:00:09+00:00', 'ok', NULL),
  (2, '2024-12-06', '2024-12-05T19:00:00+00:00', '2024-12-05T19:00:04+00:00', 'partial', 'other: no model for site ''other'''),
  (3, '2024-12-07', '2024-12-06T19:00:00+00:00', NULL, 'running', NULL);
INSERT INTO reports (id, site_id, as_of, revision, status, level_rank, level, probabilities, model_version, thresholds,
                     fingerprint, inputs, paths, reason, issued_at, run_id) VALUES
  (1, 'tallowbark', '2024-12-05', 1, 'assessed', 1, 'Alert Level 1',
   '{"Alert Level 1": 0.625, "Alert Level 2": 0.03125}', '0.3.0',
   '{"warn_at": {"Alert Level 1": 0.5, "Alert Level 2": 0.4}, "source": "built-in"}',
   'abababababababababababababababababababababababababababababababab',
   '{"files": {"/data/tallowbark/weather/tallowbark_aws_2024.txt": "cdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcdcd"}, "model": "efefefefefefefefefefefefefefefefefefefefefefefefefefefefefefefef", "thresholds": null, "cyanorisk_version": "0.3.0"}',
   '["/reports/tallowbark/tallowbark_2024-12-05.html", "/reports/tallowbark/tallowbark_2024-12-05.json"]',
   'first report for this day', '2024-12-04T19:00:05+00:00', 1),
  (2, 'tallowbark', '2024-12-05', 2, 'no assessment today', NULL, NULL, '{}', NULL, '{}',
   '0000000000000000000000000000000000000000000000000000000000000000',
   '{"files": {}, "error": "tallowbark_aws_2024.txt: not a logger export"}',
   '["/reports/tallowbark/tallowbark_2024-12-05.html"]',
   'no assessment: tallowbark_aws_2024.txt: not a logger export, inputs changed: changed file tallowbark_aws_2024.txt',
   '2024-12-06T06:00:03+11:00', 2);

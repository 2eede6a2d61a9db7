-- A quietgrade library at schema version 1, written by the version-1 store and
-- dumped with sqlite3 iterdump: three grades (one edited, one deleted), two data
-- sets from one import, a cached fit. tests/test_migrations.py opens it.
BEGIN TRANSACTION;
CREATE TABLE datasets (
	dataset_id INTEGER NOT NULL,
	material_id VARCHAR(200) NOT NULL,
	import_id INTEGER NOT NULL,
	data_hash VARCHAR(64) NOT NULL,
	n_points INTEGER NOT NULL,
	points BLOB NOT NULL,
	created_at VARCHAR(32) NOT NULL,
	deleted_at VARCHAR(32),
	PRIMARY KEY (dataset_id),
	FOREIGN KEY(import_id) REFERENCES imports (import_id)
);
INSERT INTO "datasets" VALUES(1,'QA-101',2,'cccccccccccccccccccccccccccccccccccccccccccccccccccccccccccccccc',6,X'0000000000000000000000000000F03F00000000D01253419A9999999999C93F000000000000000000000000000024400000000018FB54419A9999999999C93F0000000000003440000000000000F03FA97A761D18924941295C8FC2F528CC3F0000000000003440000000000000244021BA6820B4204C41295C8FC2F528CC3F0000000000004440000000000000F03F30F70869FA234141B91E85EB51B8CE3F00000000000044400000000000002440E80FBDA6C6DA4241B91E85EB51B8CE3F','2026-12-02T20:43:14+00:00',NULL);
INSERT INTO "datasets" VALUES(2,'QB-202',2,'dddddddddddddddddddddddddddddddddddddddddddddddddddddddddddddddd',1,X'0000000000003440000000000000F03F0000000080844E41333333333333C33F','2026-12-02T20:43:14+00:00',NULL);
CREATE TABLE fits (
	data_hash VARCHAR(64) NOT NULL,
	engine_version VARCHAR(32) NOT NULL,
	options VARCHAR(200) NOT NULL,
	result TEXT NOT NULL,
	created_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (data_hash, engine_version, options)
);
INSERT INTO "fits" VALUES('dddddddddddddddddddddddddddddddddddddddddddddddddddddddddddddddd','0.3.0','ref=auto;vertical=0;code=24f1bd3f8533','{"error": "a master curve needs at least two measured points"}','2026-12-02T20:43:14+00:00');
CREATE TABLE imports (
	import_id INTEGER NOT NULL,
	file_name TEXT NOT NULL,
	sha256 VARCHAR(64) NOT NULL,
	size_bytes INTEGER NOT NULL,
	rows INTEGER NOT NULL,
	kind VARCHAR(16) NOT NULL,
	imported_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (import_id)
);
INSERT INTO "imports" VALUES(1,'catalog.csv','aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa',300,3,'catalog','2026-12-02T20:43:14+00:00');
INSERT INTO "imports" VALUES(2,'sweeps.csv','bbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbb',400,7,'sweep','2026-12-02T20:43:14+00:00');
CREATE TABLE material_history (
	history_id INTEGER NOT NULL,
	material_id VARCHAR(200) NOT NULL,
	changed_at VARCHAR(32) NOT NULL,
	reason TEXT NOT NULL,
	previous TEXT NOT NULL,
	PRIMARY KEY (history_id)
);
INSERT INTO "material_history" VALUES(1,'QA-101','2026-12-02T20:43:14+00:00','new price list','{"id": "QA-101", "name": "Quiet A 101", "mode": "tensile", "supplier": "North Works", "family": "butyl", "density": 1150.0, "price": 7.5, "hardness": 55.0, "service_min": -40.0, "service_max": 90.0, "poisson_ratio": 0.499, "notes": "test grade", "extra": "{\"colour\": \"grey\"}", "deleted_at": null, "updated_at": "2026-12-02T20:43:14+00:00"}');
CREATE TABLE materials (
	id VARCHAR(200) NOT NULL,
	name TEXT NOT NULL,
	mode VARCHAR(16) NOT NULL,
	supplier TEXT,
	family TEXT,
	density FLOAT,
	price FLOAT,
	hardness FLOAT,
	service_min FLOAT,
	service_max FLOAT,
	poisson_ratio FLOAT,
	notes TEXT,
	extra TEXT NOT NULL,
	deleted_at VARCHAR(32),
	updated_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (id)
);
INSERT INTO "materials" VALUES('QA-101','Quiet A 101','tensile','North Works','butyl',1150.0,8.0,55.0,-40.0,90.0,0.499,'test grade','{"colour": "grey"}',NULL,'2026-12-02T20:43:14+00:00');
INSERT INTO "materials" VALUES('QB-202','Quiet B 202','shear','South Works','silicone',1220.0,12.0,40.0,-60.0,180.0,NULL,NULL,'{}',NULL,'2026-12-02T20:43:14+00:00');
INSERT INTO "materials" VALUES('QC-303','Quiet C 303','tensile',NULL,'polyurethane',1080.0,NULL,NULL,NULL,NULL,NULL,NULL,'{}','2026-12-02T20:43:14+00:00','2026-12-02T20:43:14+00:00');
CREATE TABLE meta (
	"key" VARCHAR(64) NOT NULL,
	value TEXT NOT NULL,
	PRIMARY KEY ("key")
);
INSERT INTO "meta" VALUES('schema_version','1');
INSERT INTO "meta" VALUES('library_version','3');
CREATE INDEX ix_imports_sha256 ON imports (sha256);
CREATE INDEX ix_datasets_material_id ON datasets (material_id);
COMMIT;

-- The house-library store of matcher: generated from matcher/store/models.py by
-- matcher.store.database.ddl(); do not edit by hand (tests/test_store_schema.py checks it).
-- Schema version 2.

CREATE TABLE audit_log (
	id INTEGER NOT NULL,
	at VARCHAR(32) NOT NULL,
	who VARCHAR(100) NOT NULL,
	action VARCHAR(40) NOT NULL,
	target VARCHAR(300) NOT NULL,
	"before" TEXT,
	"after" TEXT,
	revision INTEGER NOT NULL,
	PRIMARY KEY (id)
);

CREATE INDEX ix_audit_log_target ON audit_log (target);

CREATE TABLE compounds (
	id INTEGER NOT NULL,
	name VARCHAR(300) NOT NULL,
	"key" VARCHAR(300) NOT NULL,
	cas VARCHAR(12),
	formula VARCHAR(100),
	nominal_mass INTEGER,
	inchikey VARCHAR(27),
	smiles TEXT,
	notes TEXT,
	series VARCHAR(100),
	key_ions VARCHAR(200),
	created_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (id),
	UNIQUE ("key")
);

CREATE INDEX ix_compounds_cas ON compounds (cas);
CREATE INDEX ix_compounds_inchikey ON compounds (inchikey);

CREATE TABLE library_state (
	id INTEGER NOT NULL,
	revision INTEGER NOT NULL,
	changed_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (id),
	CONSTRAINT ck_library_state_single CHECK (id = 1)
);

CREATE TABLE phases (
	id INTEGER NOT NULL,
	name VARCHAR(200) NOT NULL,
	phase_class VARCHAR(20) NOT NULL,
	x FLOAT,
	y FLOAT,
	z FLOAT,
	u FLOAT,
	s FLOAT,
	source TEXT,
	PRIMARY KEY (id),
	CONSTRAINT ck_phases_class CHECK (phase_class IN ('nonpolar', 'slightly-polar', 'mid-polar', 'polar', 'highly-polar')),
	UNIQUE (name)
);

CREATE TABLE schema_version (
	version INTEGER NOT NULL,
	description TEXT NOT NULL,
	applied_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (version)
);

CREATE TABLE observations (
	id INTEGER NOT NULL,
	compound_id INTEGER NOT NULL,
	phase_class VARCHAR(20) NOT NULL,
	phase_id INTEGER,
	ri FLOAT NOT NULL,
	mode VARCHAR(12) NOT NULL,
	ri_sd FLOAT,
	n INTEGER,
	source TEXT,
	analyst VARCHAR(100),
	date VARCHAR(10),
	active BOOLEAN NOT NULL,
	retired_reason TEXT,
	retired_at VARCHAR(32),
	created_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (id),
	CONSTRAINT ck_observations_class CHECK (phase_class IN ('nonpolar', 'slightly-polar', 'mid-polar', 'polar', 'highly-polar')),
	CONSTRAINT ck_observations_mode CHECK (mode IN ('programmed', 'isothermal')),
	CONSTRAINT ck_observations_n CHECK (n IS NULL OR n >= 1),
	CONSTRAINT ck_observations_sd CHECK (ri_sd IS NULL OR ri_sd >= 0),
	FOREIGN KEY(compound_id) REFERENCES compounds (id) ON DELETE CASCADE,
	FOREIGN KEY(phase_id) REFERENCES phases (id) ON DELETE RESTRICT
);

CREATE INDEX ix_observations_active_class ON observations (active, phase_class);
CREATE INDEX ix_observations_compound_id ON observations (compound_id);

CREATE TABLE spectra (
	id INTEGER NOT NULL,
	compound_id INTEGER NOT NULL,
	title VARCHAR(300) NOT NULL,
	peaks TEXT NOT NULL,
	n_peaks INTEGER NOT NULL,
	source TEXT,
	origin TEXT,
	owner TEXT,
	records TEXT,
	file TEXT,
	analyst VARCHAR(100),
	created_at VARCHAR(32) NOT NULL,
	PRIMARY KEY (id),
	CONSTRAINT ck_spectra_n_peaks CHECK (n_peaks >= 1),
	FOREIGN KEY(compound_id) REFERENCES compounds (id) ON DELETE CASCADE
);

CREATE INDEX ix_spectra_compound_id ON spectra (compound_id);

CREATE TABLE synonyms (
	id INTEGER NOT NULL,
	compound_id INTEGER NOT NULL,
	name VARCHAR(300) NOT NULL,
	"key" VARCHAR(300) NOT NULL,
	PRIMARY KEY (id),
	FOREIGN KEY(compound_id) REFERENCES compounds (id) ON DELETE CASCADE,
	UNIQUE ("key")
);

CREATE INDEX ix_synonyms_compound_id ON synonyms (compound_id);

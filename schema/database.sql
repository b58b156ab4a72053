-- Milepost scenario database: the complete current schema (tables and views).
-- schema_version: 7
-- A new database is built from this file; an older one is brought here by the numbered files in migrations/.
-- Every change here needs a new migrations/NNNN_*.sql that makes the same change (tests compare the two).

CREATE TABLE meta (
    key VARCHAR PRIMARY KEY,
    value VARCHAR
);

CREATE TABLE submissions (
    id INTEGER PRIMARY KEY,
    model VARCHAR,              -- the submission's model (several, comma-separated, if the files mix models)
    files VARCHAR,              -- JSON list [{path, name, sha256, rows, kind}]
    sha256 VARCHAR,             -- digest over the sorted file digests: the identity of the submission
    contract_name VARCHAR,
    contract_hash VARCHAR,
    milepost_version VARCHAR,
    submitted_by VARCHAR,
    note VARCHAR,
    submitted_at TIMESTAMP,     -- UTC
    status VARCHAR,             -- 'accepted' | 'rejected' | 'superseded'
    superseded_by INTEGER,
    rows BIGINT,                -- usable rows stored (0 when rejected)
    errors INTEGER,
    warnings INTEGER,
    notes INTEGER
);

CREATE TABLE findings (
    submission_id INTEGER,
    rule VARCHAR,
    severity VARCHAR,
    path VARCHAR,
    line BIGINT,
    sheet VARCHAR,
    model VARCHAR,
    scenario VARCHAR,
    region VARCHAR,
    variable VARCHAR,
    unit VARCHAR,
    year INTEGER,
    value VARCHAR,
    expected VARCHAR,
    message VARCHAR,
    hint VARCHAR,
    column_name VARCHAR         -- the long-format column of the cell the finding points at (region, unit, value, ...)
);

-- Values are in contract units, after conversion.
CREATE TABLE data (
    submission_id INTEGER,
    model VARCHAR,
    scenario VARCHAR,
    region VARCHAR,
    variable VARCHAR,
    unit VARCHAR,
    year INTEGER,
    value DOUBLE,
    basis VARCHAR DEFAULT 'raw' -- 'raw' (as submitted) or 'harmonised' (aligned with the base-year reference)
);

CREATE TABLE scenarios (
    submission_id INTEGER,
    model VARCHAR,
    scenario VARCHAR,
    reference VARCHAR,          -- the no-policy scenario this one is compared with (same model), or NULL
    attributes VARCHAR          -- JSON object of every scenario attribute
);

-- Kinds, periods and notes: schema/indicators.toml. `note` says why a value is what it is (the reference
-- scenario a loss is measured against, a net-zero year not reached by the last reported year), or is NULL.
CREATE TABLE indicators (
    submission_id INTEGER,
    model VARCHAR,
    scenario VARCHAR,
    region VARCHAR,
    kind VARCHAR,
    variable VARCHAR,
    year_from INTEGER,
    year_to INTEGER,
    value DOUBLE,
    unit VARCHAR,
    note VARCHAR,
    basis VARCHAR DEFAULT 'raw' -- the basis of the data the indicator was computed from
);

-- Indicator kinds left out of a scenario because an input series is missing (drivers, burden sharing).
CREATE TABLE indicator_gaps (
    submission_id INTEGER,
    model VARCHAR,
    scenario VARCHAR,
    region VARCHAR,
    kind VARCHAR,
    variable VARCHAR,  -- as in the kind's rows (the allocation rule for burden kinds)
    note VARCHAR,      -- which input is missing, and that the kind is not computed
    basis VARCHAR DEFAULT 'raw'
);

-- The method used for each series of a harmonised submission (`milepost ingest --harmonise`).
CREATE TABLE harmonisation (
    submission_id INTEGER,
    model VARCHAR,
    scenario VARCHAR,
    region VARCHAR,
    variable VARCHAR,
    unit VARCHAR,
    method VARCHAR,             -- ratio | offset | converging-ratio | converging-offset | from-parts | from-regions
                                -- | unchanged | left-out
    requested VARCHAR,          -- the method the contract asked for (NULL: the series is not harmonised)
    factor DOUBLE,              -- h / m(t0), the ratio methods
    offset_value DOUBLE,        -- h - m(t0), the offset methods
    convergence_year INTEGER,   -- the converging methods
    base_value DOUBLE,          -- the model's base-year value m(t0)
    reference_value DOUBLE,     -- the contract's reference value h
    note VARCHAR                -- why: a fallback from a ratio, the parts of a rebuilt total, why it was left out
);

-- The version of each submission within its model, the one numbering the CLI and the dashboard show:
-- accepted submissions (current or superseded since) count 1, 2, 3 ... in the order they were ingested;
-- rejected submissions have none.
CREATE VIEW submission_versions AS
SELECT b.id AS submission_id, b.model,
       CASE WHEN b.status <> 'rejected' THEN
            row_number() OVER (PARTITION BY b.model, b.status = 'rejected' ORDER BY b.id) END AS version
FROM submissions AS b;

-- The newest accepted submission of each (model, scenario).
CREATE VIEW current_versions AS
SELECT s.model, s.scenario, max(s.submission_id) AS submission_id
FROM scenarios AS s
JOIN submissions AS b ON b.id = s.submission_id
WHERE b.status IN ('accepted', 'superseded')
GROUP BY s.model, s.scenario;

-- Raw values only: readers that know nothing of harmonisation keep reading what was submitted.
CREATE VIEW current_data AS
SELECT d.submission_id, d.model, d.scenario, d.region, d.variable, d.unit, d.year, d.value
FROM data AS d
JOIN current_versions AS c ON c.submission_id = d.submission_id AND c.model = d.model AND c.scenario = d.scenario
WHERE d.basis = 'raw';

CREATE VIEW current_scenarios AS
SELECT s.submission_id, s.model, s.scenario, s.reference, s.attributes
FROM scenarios AS s
JOIN current_versions AS c ON c.submission_id = s.submission_id AND c.model = s.model AND c.scenario = s.scenario;

CREATE VIEW current_indicators AS
SELECT i.submission_id, i.model, i.scenario, i.region, i.kind, i.variable, i.year_from, i.year_to, i.value, i.unit,
       i.note
FROM indicators AS i
JOIN current_versions AS c ON c.submission_id = i.submission_id AND c.model = i.model AND c.scenario = i.scenario
WHERE i.basis = 'raw';

-- Both bases, for readers that choose one (the dashboard's raw/harmonised switch, `milepost export --basis`).
CREATE VIEW current_data_by_basis AS
SELECT d.submission_id, d.model, d.scenario, d.region, d.variable, d.unit, d.year, d.value, d.basis
FROM data AS d
JOIN current_versions AS c ON c.submission_id = d.submission_id AND c.model = d.model AND c.scenario = d.scenario;

CREATE VIEW current_indicators_by_basis AS
SELECT i.submission_id, i.model, i.scenario, i.region, i.kind, i.variable, i.year_from, i.year_to, i.value, i.unit,
       i.note, i.basis
FROM indicators AS i
JOIN current_versions AS c ON c.submission_id = i.submission_id AND c.model = i.model AND c.scenario = i.scenario;

CREATE VIEW current_harmonisation AS
SELECT h.submission_id, h.model, h.scenario, h.region, h.variable, h.unit, h.method, h.requested, h.factor,
       h.offset_value, h.convergence_year, h.base_value, h.reference_value, h.note
FROM harmonisation AS h
JOIN current_versions AS c ON c.submission_id = h.submission_id AND c.model = h.model AND c.scenario = h.scenario;

CREATE VIEW current_indicator_gaps AS
SELECT g.submission_id, g.model, g.scenario, g.region, g.kind, g.variable, g.note
FROM indicator_gaps AS g
JOIN current_versions AS c ON c.submission_id = g.submission_id AND c.model = g.model AND c.scenario = g.scenario
WHERE g.basis = 'raw';

CREATE VIEW current_indicator_gaps_by_basis AS
SELECT g.submission_id, g.model, g.scenario, g.region, g.kind, g.variable, g.note, g.basis
FROM indicator_gaps AS g
JOIN current_versions AS c ON c.submission_id = g.submission_id AND c.model = g.model AND c.scenario = g.scenario;

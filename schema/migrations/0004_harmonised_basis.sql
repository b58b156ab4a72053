-- Migration 4: harmonised values beside the raw ones, and the method used for each harmonised series.
-- `basis` says which values a row holds: 'raw' (as submitted, in contract units) or 'harmonised' (aligned with
-- the contract's base-year reference values by `milepost ingest --harmonise`). Every row stored before is raw.

ALTER TABLE data ADD COLUMN basis VARCHAR DEFAULT 'raw';
ALTER TABLE indicators ADD COLUMN basis VARCHAR DEFAULT 'raw';

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

-- Readers that know nothing of harmonisation keep reading the raw values.
CREATE OR REPLACE VIEW current_data AS
SELECT d.submission_id, d.model, d.scenario, d.region, d.variable, d.unit, d.year, d.value
FROM data AS d
JOIN current_versions AS c ON c.submission_id = d.submission_id AND c.model = d.model AND c.scenario = d.scenario
WHERE d.basis = 'raw';

CREATE OR REPLACE VIEW current_indicators AS
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

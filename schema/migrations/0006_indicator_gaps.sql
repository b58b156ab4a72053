-- Migration 6: emission drivers (Kaya factors, LMDI effects) and burden sharing (allowances, permits, transfers)
-- are new indicator kinds. They need several input series; a scenario lacking one gets no rows of that kind but
-- a row in `indicator_gaps` saying which input is missing, per basis. The marker below makes the next
-- `milepost ingest` compute the new kinds and gaps for every stored submission.

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

CREATE VIEW current_indicator_gaps AS
SELECT g.submission_id, g.model, g.scenario, g.region, g.kind, g.variable, g.note
FROM indicator_gaps AS g
JOIN current_versions AS c ON c.submission_id = g.submission_id AND c.model = g.model AND c.scenario = g.scenario
WHERE g.basis = 'raw';

CREATE VIEW current_indicator_gaps_by_basis AS
SELECT g.submission_id, g.model, g.scenario, g.region, g.kind, g.variable, g.note, g.basis
FROM indicator_gaps AS g
JOIN current_versions AS c ON c.submission_id = g.submission_id AND c.model = g.model AND c.scenario = g.scenario;

INSERT INTO meta
SELECT 'indicators_outdated', 'computed before the driver and burden-sharing indicators existed'
WHERE EXISTS (SELECT 1 FROM indicators) AND NOT EXISTS (SELECT 1 FROM meta WHERE key = 'indicators_outdated');

-- Migration 2: indicators follow the published conventions (schema/indicators.toml): cumulative sums of annual
-- values with both ends included, net-zero and peak years from the base year on, three linear rates, GDP growth
-- reduction, and a `note` column. The stored rows were computed under the old conventions: the marker below makes
-- the next `milepost ingest` (with its contract) recompute every stored indicator, then remove the marker.

ALTER TABLE indicators ADD COLUMN note VARCHAR;

CREATE OR REPLACE VIEW current_indicators AS
SELECT i.submission_id, i.model, i.scenario, i.region, i.kind, i.variable, i.year_from, i.year_to, i.value, i.unit,
       i.note
FROM indicators AS i
JOIN current_versions AS c ON c.submission_id = i.submission_id AND c.model = i.model AND c.scenario = i.scenario;

INSERT INTO meta
SELECT 'indicators_outdated', 'computed under the conventions of an older milepost'
WHERE EXISTS (SELECT 1 FROM indicators);

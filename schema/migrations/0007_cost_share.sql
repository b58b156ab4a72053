-- Migration 7: regional cost shares (`cost_share`: each trading region's share of the market region's abatement
-- cost and of the summed regional loss) are a new indicator kind. No table changes; the marker below makes the
-- next `milepost ingest` compute the new kind for every stored submission.

INSERT INTO meta
SELECT 'indicators_outdated', 'computed before the regional cost shares existed'
WHERE EXISTS (SELECT 1 FROM indicators) AND NOT EXISTS (SELECT 1 FROM meta WHERE key = 'indicators_outdated');

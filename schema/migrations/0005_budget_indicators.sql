-- Migration 5: carbon-budget indicators (cumulative_net_zero, budget_level, warming_peak, warming_peak_low,
-- warming_peak_high) are new kinds, so stored submissions have none of them. No table changes: the marker below
-- makes the next `milepost ingest` (with its contract, which holds the budgets) recompute every stored indicator.
-- A database migrated from schema 1 in the same step already carries the marker of migration 2.

INSERT INTO meta
SELECT 'indicators_outdated', 'computed before the carbon-budget indicators existed'
WHERE EXISTS (SELECT 1 FROM indicators) AND NOT EXISTS (SELECT 1 FROM meta WHERE key = 'indicators_outdated');

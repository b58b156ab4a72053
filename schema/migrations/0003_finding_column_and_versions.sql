-- Migration 3: findings name the column of the cell they point at; one numbering of submission versions.

ALTER TABLE findings ADD COLUMN column_name VARCHAR;

-- The version of each submission within its model, the one numbering the CLI and the dashboard show:
-- accepted submissions (current or superseded since) count 1, 2, 3 ... in the order they were ingested;
-- rejected submissions have none.
CREATE VIEW submission_versions AS
SELECT b.id AS submission_id, b.model,
       CASE WHEN b.status <> 'rejected' THEN
            row_number() OVER (PARTITION BY b.model, b.status = 'rejected' ORDER BY b.id) END AS version
FROM submissions AS b;

-- fxledger schema, version 3: indexes for a large database
-- (docs/performance.md). Additive only: no table or column changes.

-- Monthly reports select fractions by treatment time; without this index
-- each of their queries read every measurement of the database.
CREATE INDEX fractions_by_time ON fractions (treated_at);

-- "The latest plan that no other plan replaces" (record, history) looked for
-- replacing plans by reading the whole plans table.
CREATE INDEX plans_by_replaces ON plans (replaces_plan_id);

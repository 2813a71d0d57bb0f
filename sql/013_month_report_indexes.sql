-- fxledger schema, version 13: an index for the monthly report's open queue
-- (docs/performance.md). Additive only: no row is changed.
--
-- The queue as it stood at the end of a month starts from the items that
-- are not closed now and the items with a review event after that time;
-- every other item is closed and was already closed then. Without this
-- index SQLite read the latest event of every item ever opened (about
-- 90,000 on ten departments' twenty years) to keep a few dozen.
CREATE INDEX review_events_by_time ON review_events (created_at);

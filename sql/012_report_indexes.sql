-- fxledger schema, version 12: an index for the per-patient report
-- (docs/performance.md, change 13). Additive only: no row is changed.
--
-- The report's signatures section starts from the patient's review items;
-- without this index SQLite read every signature of every review event in
-- the database (about 9,000 on twenty years) to keep one patient's.
CREATE INDEX review_items_by_patient ON review_items (patient_id);

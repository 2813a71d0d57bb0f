-- fxledger schema, version 14: the rules' history index covers their
-- queries again (docs/performance.md, change 18). No row is changed.
--
-- measurements_by_detector_history (sql/004) carried every column the
-- dose-limit and drift rules read, until gross results (sql/005)
-- added m.gross to both and the dose-limit sum counts a gross result at its
-- expected dose. Since then each row since the calibration was read from
-- its own page of measurements as well (about 1,300 pages per logged
-- fraction on a department's database, in a process whose page cache
-- starts empty). The same index with those two columns at its end serves
-- every query it served before: the leading columns are unchanged.
DROP INDEX measurements_by_detector_history;
CREATE INDEX measurements_by_detector_history ON measurements
    (detector_id, created_at, fraction_id, field_id, verdict, deviation_pct, corrected_dose_cgy,
     gross, expected_dose_cgy);

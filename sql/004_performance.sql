-- fxledger schema, version 4: a covering index for the rules over history
-- (docs/performance.md). Additive only.

-- Every logged fraction sums the detector's dose since its calibration and
-- runs its drift statistics over the same rows (store/rules_hook.c). With
-- measurements_by_detector alone each of those rows is read from the
-- measurements table, one page apiece; this index carries the columns those
-- queries need, so they read a few index pages instead.
CREATE INDEX measurements_by_detector_history ON measurements
    (detector_id, created_at, fraction_id, field_id, verdict, deviation_pct, corrected_dose_cgy);

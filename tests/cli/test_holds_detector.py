"""Open items shown to the therapist before a fraction is logged
(src/store/worklist.c, wl_items): the patient's own items and the items
on a detector the fraction uses, and no other detector's. A calibration
falling due (docs/rules.md: 14 days before valid-until) opens an item on
the detector, not on a patient. The department is review_scenario.py's
(invented), with a second diode calibrated until well after."""
import re

from fxlcli import main
from review_scenario import ReviewCase, reading_for


class HoldsOnDetectorsTest(ReviewCase):
    def setUp(self):
        super().setUp()
        self.fx.now = "2026-10-01T09:00:00Z"
        self.add_diode("D-2", "2027-06-30", user="phys")

    def log(self, mrn, at, detector):
        self.fx.now = at[:-3] + "30Z"
        r = self.fx.run("record", "--patient", mrn, "--at", at, "--field", "AP", "--detector",
                        detector, "--reading", reading_for(0.5), user="ther")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        return r.stdout

    def test_detector_item_listed_for_its_detector_only(self):
        # D-1 is valid until 2026-12-31: on 2026-12-18 its calibration falls due
        self.log("P-1", "2026-12-18T08:00:00Z", "D-1")
        out = self.log("P-2", "2026-12-18T09:00:00Z", "D-1")
        self.assertTrue(out.startswith("Open before this fraction was logged:"), out)
        before = out.split("\n\n")[0]
        self.assertRegex(before, r"item #\d+ \(\w+, detector\): detector D-1: calibration")
        # the same patient's next fraction on the other diode: D-1's item is
        # not this fraction's business
        out = self.log("P-2", "2026-12-19T09:00:00Z", "D-2")
        before = out.split("\n\n")[0] if out.startswith("Open before") else ""
        self.assertNotRegex(before, r"detector D-1")


if __name__ == "__main__":
    main()

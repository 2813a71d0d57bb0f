#!/usr/bin/python3
"""Writes demo/data/rtplan-DEMO-1005.json: the INVENTED demo patient
DEMO-1005's RT Plan in the DICOM JSON Model (PS3.18 Annex F), made with
pydicom through the test generator tests/data/dicom/make_rtplan.py. Two
opposed 6 MV fields on LINAC-A (AP with an MLC, PA open) and a set-up beam
that the import leaves out. Every value is invented; run_demo.py reads the
committed file, so the demo does not need pydicom.

Usage: make_demo_rtplan.py [OUTFILE]"""
import json
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "tests", "data", "dicom"))
import make_rtplan as mk  # noqa: E402


def plan():
    def beam(number, name, gantry, mu, ssd_mm, **kw):
        b = mk.photon(number, name, gantry, mu, ssd_mm, 12, 15, **kw)
        b["machine"] = "LINAC-A"
        return b

    setup = {"number": 9, "name": "SETUP-AP", "machine": "LINAC-A", "radiation": "PHOTON", "energy": 6,
             "gantry": 0, "sad_mm": 1000, "ssd_mm": 905.0, "delivery": "SETUP",
             "jaws": {"X": [-100, 100], "Y": [-100, 100]}}
    return {
        "patient_id": "DEMO-1005", "patient_name": "Lindqvist^Aurelio", "label": "THX-AP-PA",
        "plan_name": "thorax palliative AP-PA (invented)", "fractions": 10, "prescription_gy": 30,
        "beams": [
            beam(1, "AP", 0, 131.0, 905.0, mlc=mk.mlc_rectangle(-60, 55, -70, 75)),
            beam(2, "PA", 180, 128.0, 893.0),
            setup,
        ],
    }


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.join(HERE, "data", "rtplan-DEMO-1005.json")
    model = mk.dataset(plan(), "rtplan-DEMO-1005").to_json_dict()
    with open(out, "w", encoding="utf-8") as f:
        json.dump(model, f, sort_keys=True, indent=1)
        f.write("\n")
    print(out)


if __name__ == "__main__":
    main()

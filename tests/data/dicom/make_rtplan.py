#!/usr/bin/python3
"""Writes invented DICOM RT Plans with pydicom (a reference implementation of
the standard), converts each to the DICOM JSON Model (PS3.18 Annex F) with
pydicom's Dataset.to_json_dict() and, with --dcm2json, also through a DICOM
file and dcmtk's dcm2json, and writes beside each plan NAME.expect.json: the
values fxledger must read back, computed here from what was written (or the
words of the refusal it must give). tests/unit/test_dicom_plan.c checks every
plan of a directory against its expectation.

  make_rtplan.py OUTDIR                 the fixed cases (committed in tests/data/dicom/)
  make_rtplan.py OUTDIR --seed N        random plans from seed N (tests/cli/test_dicom_roundtrip.py)
  make_rtplan.py OUTDIR --dcm2json      also convert each plan with dcm2json
  make_rtplan.py OUTDIR --part10        DICOM Part 10 files instead (tests/data/dicom/part10/):
                                        pydicom's Dataset.save_as with file meta in
                                        each transfer syntax, and dcmtk's dump2dcm
                                        as a second writer of the same data sets

Every patient and plan here is invented."""
import argparse
import hashlib
import json
import os
import random
import shutil
import subprocess
import sys

from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.sequence import Sequence
from pydicom.uid import (DeflatedExplicitVRLittleEndian, ExplicitVRBigEndian, ExplicitVRLittleEndian,
                         ImplicitVRLittleEndian)

RT_PLAN = "1.2.840.10008.5.1.4.1.1.481.5"
RT_ION_PLAN = "1.2.840.10008.5.1.4.1.1.481.8"


def ds_text(v):
    """A decimal string as DICOM stores it (at most 16 characters)."""
    s = "%.6g" % v
    assert len(s) <= 16
    return s


def ds_value(v):
    """The number a reader gets back from ds_text(v)."""
    return float(ds_text(v))


def uid_for(name):
    return "2.25.%d" % (int(hashlib.sha256(name.encode()).hexdigest()[:30], 16))


def mlc_boundaries(pairs=40, width_mm=10.0):
    half = pairs * width_mm / 2
    return [-half + i * width_mm for i in range(pairs + 1)]


def mlc_rectangle(x1, x2, y1, y2, pairs=40, width_mm=10.0, closed_at=0.0, closed_gap=0.5):
    """Leaf banks that open the rectangle x1..x2 (mm) on the pairs that lie
    inside y1..y2; other pairs closed with a small gap at closed_at."""
    bounds = mlc_boundaries(pairs, width_mm)
    a, b = [], []
    for i in range(pairs):
        lo, hi = bounds[i], bounds[i + 1]
        if hi > y1 and lo < y2:
            a.append(x1)
            b.append(x2)
        else:
            a.append(closed_at - closed_gap / 2)
            b.append(closed_at + closed_gap / 2)
    return {"boundaries": bounds, "a": a, "b": b}


# ---- the expected values, computed independently of the C reader ------------

def eqsq(x, y):
    """Equivalent square of an X x Y rectangle, 4A/P (Sterling rule)."""
    return 2.0 * x * y / (x + y)


def expected_field(beam):
    """Jaw openings and the MLC-limited rectangle, cm, by the rule in
    docs/dicom-import.md: leaf pairs open wider than 1 mm whose band crosses
    the Y jaws bound the field, clipped to the jaws."""
    jaws = beam["jaws"]
    x = jaws.get("ASYMX") or jaws.get("X")
    y = jaws.get("ASYMY") or jaws.get("Y")
    x = [ds_value(v) for v in x] if x else None
    y = [ds_value(v) for v in y] if y else None
    mlc = beam.get("mlc")
    if not mlc:
        jx, jy = x[1] - x[0], y[1] - y[0]
        return jx / 10, jy / 10, jx / 10, jy / 10
    bounds = [ds_value(v) for v in mlc["boundaries"]]
    a = [ds_value(v) for v in mlc["a"]]
    b = [ds_value(v) for v in mlc["b"]]
    yl, yh = (y[0], y[1]) if y else (-1e9, 1e9)
    open_pairs = [i for i in range(len(a))
                  if b[i] - a[i] > 1.0 and bounds[i + 1] > yl and bounds[i] < yh]
    amin = min(a[i] for i in open_pairs)
    bmax = max(b[i] for i in open_pairs)
    ylo = min(max(bounds[i], yl) for i in open_pairs)
    yhi = max(min(bounds[i + 1], yh) for i in open_pairs)
    if x:
        fx = min(x[1], bmax) - max(x[0], amin)
        jx = x[1] - x[0]
    else:
        fx = jx = bmax - amin
    fy = yhi - ylo
    jy = y[1] - y[0] if y else fy
    return jx / 10, jy / 10, fx / 10, fy / 10


def expected_beam(beam):
    jx, jy, fx, fy = expected_field(beam)
    wedges_in = [w for w in beam.get("wedges", []) if w.get("in", True)]
    photon = beam["radiation"] == "PHOTON"
    name = beam.get("name") or "beam %d" % beam["number"]
    return {
        "number": beam["number"],
        "name": name,
        "machine": beam.get("machine", ""),
        "radiation": beam["radiation"],
        "modality": beam["radiation"].lower(),
        "energy": ds_value(beam["energy"]),
        "gantry_deg": ds_value(beam["gantry"]),
        "collimator_deg": ds_value(beam["collimator"]) if "collimator" in beam else None,
        "couch_deg": ds_value(beam["couch"]) if "couch" in beam else None,
        "sad_cm": ds_value(beam["sad_mm"]) / 10 if "sad_mm" in beam else None,
        "ssd_cm": ds_value(beam["ssd_mm"]) / 10,
        "mu": ds_value(beam["mu"]),
        "beam_dose_cgy": ds_value(beam["beam_dose_gy"]) * 100 if "beam_dose_gy" in beam else None,
        "wedge_count": len(wedges_in),
        "wedge_deg": float(wedges_in[0]["angle"]) if wedges_in else 0.0,
        "wedge_id": wedges_in[0].get("id", "") if wedges_in else "",
        "block_count": len(beam.get("blocks", [])),
        "tray": 1 if photon and beam.get("blocks") else 0,
        "jaw_x_cm": jx, "jaw_y_cm": jy,
        "field_x_cm": fx, "field_y_cm": fy,
        "mlc": 1 if beam.get("mlc") else 0,
        "coll_eqsq_cm": eqsq(jx, jy),
        "field_eqsq_cm": eqsq(fx, fy),
    }


def expected_plan(plan, name, source):
    treat = [b for b in plan["beams"] if b.get("delivery", "TREATMENT") in ("TREATMENT", "TRMT_PORTFILM")]
    dose = plan.get("prescription_gy")
    return {
        "plan": name,
        "source": source,
        "patient_id": plan["patient_id"],
        "patient_name": plan.get("patient_name", ""),
        "family_name": plan.get("patient_name", "").split("^")[0],
        "given_name": (plan.get("patient_name", "").split("^") + [""])[1],
        "label": plan["label"],
        "fractions": plan["fractions"],
        "dose_per_fraction_cgy": ds_value(dose) * 100 / plan["fractions"] if dose else None,
        "notes": plan.get("notes", []),
        "beams": [expected_beam(b) for b in treat],
    }


# ---- writing the data set -------------------------------------------------------

def bld_positions(kind, values):
    it = Dataset()
    it.RTBeamLimitingDeviceType = kind
    it.LeafJawPositions = [ds_text(v) for v in values]
    return it


def control_point(beam, index, cumulative):
    cp = Dataset()
    cp.ControlPointIndex = index
    cp.CumulativeMetersetWeight = ds_text(cumulative)
    if index == 0:
        cp.NominalBeamEnergy = ds_text(beam["energy"])
        cp.GantryAngle = ds_text(beam["gantry"])
        cp.GantryRotationDirection = beam.get("rotation", "NONE")
        if "collimator" in beam:
            cp.BeamLimitingDeviceAngle = ds_text(beam["collimator"])
            cp.BeamLimitingDeviceRotationDirection = "NONE"
        if "couch" in beam:
            cp.PatientSupportAngle = ds_text(beam["couch"])
            cp.PatientSupportRotationDirection = "NONE"
        if "ssd_mm" in beam:
            cp.SourceToSurfaceDistance = ds_text(beam["ssd_mm"])
        cp.IsocenterPosition = ["0", "0", "0"]
        items = [bld_positions(k, v) for k, v in beam["jaws"].items()]
        if beam.get("mlc"):
            items.append(bld_positions("MLCX", beam["mlc"]["a"] + beam["mlc"]["b"]))
        cp.BeamLimitingDevicePositionSequence = Sequence(items)
        wedges = beam.get("wedges", [])
        if any("in" in w for w in wedges):
            seqi = []
            for w in wedges:
                wp = Dataset()
                wp.ReferencedWedgeNumber = w["number"]
                wp.WedgePosition = "IN" if w.get("in", True) else "OUT"
                seqi.append(wp)
            cp.WedgePositionSequence = Sequence(seqi)
    else:
        if "end_gantry" in beam:
            cp.GantryAngle = ds_text(beam["end_gantry"])
        if "end_mlc" in beam:
            cp.BeamLimitingDevicePositionSequence = Sequence(
                [bld_positions("MLCX", beam["end_mlc"]["a"] + beam["end_mlc"]["b"])])
        if "end_wedge_in" in beam:
            wp = Dataset()
            wp.ReferencedWedgeNumber = beam["wedges"][0]["number"]
            wp.WedgePosition = "IN" if beam["end_wedge_in"] else "OUT"
            cp.WedgePositionSequence = Sequence([wp])
    return cp


def beam_item(beam):
    it = Dataset()
    it.BeamNumber = beam["number"]
    if beam.get("name"):
        it.BeamName = beam["name"]
    if "machine" in beam:
        it.TreatmentMachineName = beam["machine"]
    it.PrimaryDosimeterUnit = beam.get("unit", "MU")
    if "sad_mm" in beam:
        it.SourceAxisDistance = ds_text(beam["sad_mm"])
    devs = []
    for kind in beam["jaws"]:
        d = Dataset()
        d.RTBeamLimitingDeviceType = kind
        d.NumberOfLeafJawPairs = 1
        devs.append(d)
    if beam.get("mlc"):
        d = Dataset()
        d.RTBeamLimitingDeviceType = "MLCX"
        d.NumberOfLeafJawPairs = len(beam["mlc"]["a"])
        d.LeafPositionBoundaries = [ds_text(v) for v in beam["mlc"]["boundaries"]]
        devs.append(d)
    it.BeamLimitingDeviceSequence = Sequence(devs)
    it.BeamType = beam.get("beam_type", "STATIC")
    it.RadiationType = beam["radiation"]
    it.TreatmentDeliveryType = beam.get("delivery", "TREATMENT")
    wedges = beam.get("wedges", [])
    it.NumberOfWedges = len(wedges)
    if wedges:
        seqw = []
        for w in wedges:
            d = Dataset()
            d.WedgeNumber = w["number"]
            d.WedgeType = w.get("type", "STANDARD")
            if "id" in w:
                d.WedgeID = w["id"]
            d.WedgeAngle = w["angle"]
            d.WedgeFactor = "0.7"
            d.WedgeOrientation = "0"
            seqw.append(d)
        it.WedgeSequence = Sequence(seqw)
    it.NumberOfCompensators = beam.get("compensators", 0)
    it.NumberOfBoli = beam.get("boli", 0)
    blocks = beam.get("blocks", [])
    it.NumberOfBlocks = len(blocks)
    if blocks:
        seqb = []
        for i, tray in enumerate(blocks):
            d = Dataset()
            d.BlockTrayID = tray
            d.BlockNumber = i + 1
            d.BlockType = "SHIELDING"
            d.BlockDivergence = "PRESENT"
            d.MaterialID = "invented alloy"
            d.BlockNumberOfPoints = 4
            d.BlockData = ["-20", "-20", "-20", "20", "20", "20", "20", "-20"]
            seqb.append(d)
        it.BlockSequence = Sequence(seqb)
    if "applicator" in beam:
        d = Dataset()
        d.ApplicatorID = beam["applicator"]
        d.ApplicatorType = "ELECTRON_SQUARE"
        it.ApplicatorSequence = Sequence([d])
    n = beam.get("control_points", 2)
    it.NumberOfControlPoints = n
    it.ControlPointSequence = Sequence(
        [control_point(beam, i, i / (n - 1) if n > 1 else 1.0) for i in range(n)])
    return it


def dataset(plan, name):
    ds = Dataset()
    if "charset" in plan:
        ds.SpecificCharacterSet = plan["charset"]
    ds.SOPClassUID = plan.get("sop_class", RT_PLAN)
    ds.SOPInstanceUID = uid_for(name)
    ds.Modality = "RTPLAN"
    ds.PatientName = plan.get("patient_name", "")
    ds.PatientID = plan["patient_id"]
    ds.RTPlanLabel = plan["label"]
    if "plan_name" in plan:
        ds.RTPlanName = plan["plan_name"]
    ds.RTPlanGeometry = "PATIENT"
    if plan.get("prescription_gy"):
        refs = []
        for i, dose in enumerate(plan.get("prescriptions", [plan["prescription_gy"]])):
            d = Dataset()
            d.DoseReferenceNumber = i + 1
            d.DoseReferenceStructureType = "SITE"
            d.DoseReferenceType = "TARGET"
            d.TargetPrescriptionDose = ds_text(dose)
            refs.append(d)
        ds.DoseReferenceSequence = Sequence(refs)
    groups = []
    for g in range(plan.get("fraction_groups", 1)):
        fg = Dataset()
        fg.FractionGroupNumber = g + 1
        fg.NumberOfFractionsPlanned = plan["fractions"]
        refs = []
        for b in plan["beams"]:
            if b.get("unreferenced"):
                continue
            r = Dataset()
            r.ReferencedBeamNumber = b["number"]
            if "mu" in b:
                r.BeamMeterset = ds_text(b["mu"])
            if "beam_dose_gy" in b:
                r.BeamDose = ds_text(b["beam_dose_gy"])
            refs.append(r)
        fg.NumberOfBeams = len(refs)
        fg.NumberOfBrachyApplicationSetups = 0
        fg.ReferencedBeamSequence = Sequence(refs)
        groups.append(fg)
    ds.FractionGroupSequence = Sequence(groups)
    ds.BeamSequence = Sequence([beam_item(b) for b in plan["beams"]])
    for keyword in plan.get("drop", []):
        delattr(ds, keyword)
    for index, keyword in plan.get("drop_in_fraction_group", []):
        delattr(ds.FractionGroupSequence[0].ReferencedBeamSequence[index], keyword)
    return ds


def write_case(outdir, name, plan, refuse, use_dcmtk):
    ds = dataset(plan, name)
    written = []
    sources = [("pydicom", name + ".json", ds.to_json_dict())]
    if use_dcmtk:
        dcm = os.path.join(outdir, name + ".dcm")
        meta = FileMetaDataset()
        meta.MediaStorageSOPClassUID = ds.SOPClassUID
        meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
        meta.TransferSyntaxUID = ExplicitVRLittleEndian
        ds.file_meta = meta
        ds.is_little_endian = True
        ds.is_implicit_VR = False
        ds.save_as(dcm, write_like_original=False)
        out = os.path.join(outdir, name + ".dcmtk.json")
        subprocess.run(["dcm2json", dcm, out], check=True)
        os.remove(dcm)
        with open(out, encoding="utf-8") as f:
            sources.append(("dcmtk", name + ".dcmtk.json", json.load(f)))
    for source, fname, model in sources:
        with open(os.path.join(outdir, fname), "w", encoding="utf-8") as f:
            json.dump(model, f, sort_keys=True, separators=(",", ":"))
            f.write("\n")
        if refuse:
            expect = {"plan": fname, "source": source, "refuse": refuse}
        else:
            expect = expected_plan(plan, fname, source)
        stem = fname[:-len(".json")]
        with open(os.path.join(outdir, stem + ".expect.json"), "w", encoding="utf-8") as f:
            json.dump(expect, f, indent=1, sort_keys=True)
            f.write("\n")
        written.append(fname)
    return written


# ---- the fixed cases -------------------------------------------------------------

def photon(number, name, gantry, mu, ssd_mm, x, y, **kw):
    b = {"number": number, "name": name, "machine": "LINAC1", "radiation": "PHOTON",
         "energy": 6, "gantry": gantry, "collimator": 0, "couch": 0, "sad_mm": 1000,
         "ssd_mm": ssd_mm, "mu": mu,
         "jaws": {"ASYMX": [-x * 5, x * 5], "ASYMY": [-y * 5, y * 5]}}
    b.update(kw)
    return b


def three_field():
    """Pelvis, three fields: AP open, two laterals with 30 deg wedges; the AP
    at 10 MV shaped by an MLC, one lateral carries a blocking tray."""
    mlc = mlc_rectangle(-60, 55, -65, 70)
    return {
        "patient_id": "TEST-0002", "patient_name": "Testperson^Ada", "label": "PEL-3F",
        "plan_name": "pelvis three field", "fractions": 25, "prescription_gy": 50,
        "beams": [
            photon(1, "AP", 0, 132.5, 905.0, 14, 16, energy=10, mlc=mlc, beam_dose_gy=0.72),
            photon(2, "RLAT", 270, 118.4, 842.5, 12, 16, collimator=90,
                   wedges=[{"number": 1, "angle": 30, "id": "W30", "type": "STANDARD"}]),
            photon(3, "LLAT", 90, 121.7, 838.0, 12, 16, couch=355,
                   wedges=[{"number": 1, "angle": 30, "id": "W30"}], blocks=["TRAY-A"]),
        ],
    }


def electron_single():
    b = {"number": 1, "name": "E-BOOST", "machine": "LINAC1", "radiation": "ELECTRON",
         "energy": 9, "gantry": 15, "sad_mm": 1000, "ssd_mm": 1000, "mu": 212,
         "applicator": "A10", "blocks": ["CUTOUT-6"],
         "jaws": {"X": [-100, 100], "Y": [-100, 100]}}
    return {"patient_id": "TEST-0003", "patient_name": "Exempel^Bo", "label": "BOOST",
            "fractions": 5, "beams": [b]}


def demo_breast():
    """The demo scenario's breast plan: two tangents with 15 deg wedges and a
    set-up beam that is left out."""
    setup = {"number": 9, "name": "SETUP-AP", "machine": "LINAC1", "radiation": "PHOTON",
             "energy": 6, "gantry": 0, "sad_mm": 1000, "ssd_mm": 915.0, "mu": 0,
             "delivery": "SETUP", "jaws": {"X": [-100, 100], "Y": [-100, 100]}}
    plan = {
        "patient_id": "DEMO-0001", "patient_name": "Muster^Erika", "label": "BR-L",
        "plan_name": "left breast tangents", "fractions": 16, "prescription_gy": 42.56,
        "beams": [
            photon(1, "MED", 305, 118.0, 915.0, 9, 18, collimator=10,
                   wedges=[{"number": 1, "angle": 15, "id": "W15"}]),
            photon(2, "LAT", 125, 116.0, 905.0, 9, 18, collimator=350,
                   wedges=[{"number": 1, "angle": 15, "id": "W15"}]),
            setup,
        ],
        "notes": ["SETUP beam left out"],
    }
    del plan["beams"][2]["mu"]
    return plan


def with_beam(plan, index, **changes):
    plan["beams"][index].update(changes)
    return plan


def fixed_cases():
    """(name, plan, words of the refusal or None)"""
    cases = [
        ("three_field", three_field(), None),
        ("electron_single", electron_single(), None),
        ("demo_breast", demo_breast(), None),
    ]
    noname = three_field()
    noname["beams"][2]["name"] = None
    cases.append(("unnamed_beam", noname, None))
    motor = three_field()
    motor["beams"][1]["wedges"] = [{"number": 1, "angle": 60, "id": "MW", "type": "MOTORIZED", "in": False}]
    cases.append(("motorised_wedge_out", motor, None))

    arc = three_field()
    with_beam(arc, 0, beam_type="DYNAMIC", rotation="CW", gantry=181, end_gantry=179, control_points=3)
    cases.append(("refuse_arc", arc, "is an arc"))
    arc2 = three_field()
    with_beam(arc2, 1, beam_type="DYNAMIC", end_gantry=300)
    cases.append(("refuse_arc_no_direction", arc2, "is an arc (gantry moves from 270 to 300 deg)"))
    imrt = three_field()
    with_beam(imrt, 0, beam_type="DYNAMIC", end_mlc=mlc_rectangle(-30, 30, -65, 70))
    cases.append(("refuse_modulated", imrt, "is modulated"))
    proton = three_field()
    with_beam(proton, 2, radiation="PROTON")
    cases.append(("refuse_proton_beam", proton, "radiation type 'PROTON' is not supported"))
    ion = three_field()
    ion["sop_class"] = RT_ION_PLAN
    cases.append(("refuse_ion_plan", ion, "RT Ion Plan"))
    neutron = electron_single()
    with_beam(neutron, 0, radiation="NEUTRON")
    cases.append(("refuse_neutron", neutron, "radiation type 'NEUTRON'"))
    groups = three_field()
    groups["fraction_groups"] = 2
    cases.append(("refuse_two_fraction_groups", groups, "2 fraction groups"))
    nossd = three_field()
    del nossd["beams"][1]["ssd_mm"]
    cases.append(("refuse_missing_ssd", nossd, "beam 'RLAT' (number 2): Source to Surface Distance (300A,0130) is missing"))
    nomu = three_field()
    nomu["beams"][2]["unreferenced"] = True
    cases.append(("refuse_beam_not_in_fraction_group", nomu, "beam 'LLAT' (number 3) is not in the fraction group"))
    noid = three_field()
    noid["drop"] = ["PatientID"]
    cases.append(("refuse_missing_patient_id", noid, "Patient ID (0010,0020) is missing"))
    nolabel = three_field()
    nolabel["drop"] = ["RTPlanLabel"]
    cases.append(("refuse_missing_plan_label", nolabel, "RT Plan Label (300A,0002) is missing"))
    two_wedges = three_field()
    two_wedges["beams"][1]["wedges"].append({"number": 2, "angle": 15, "id": "W15"})
    cases.append(("refuse_two_wedges", two_wedges, "2 wedges in the field"))
    moving = three_field()
    moving["beams"][1]["wedges"] = [{"number": 1, "angle": 60, "id": "MW", "type": "MOTORIZED", "in": True}]
    moving["beams"][1]["end_wedge_in"] = False
    cases.append(("refuse_moving_wedge", moving, "motorised wedge moves out"))
    minute = electron_single()
    with_beam(minute, 0, unit="MINUTE")
    cases.append(("refuse_timer_beam", minute, "primary dosimeter unit 'MINUTE'"))
    comp = three_field()
    with_beam(comp, 0, compensators=1)
    cases.append(("refuse_compensator", comp, "compensators are not supported"))
    closed = three_field()
    with_beam(closed, 0, mlc=mlc_rectangle(0, 0.5, -65, 70))
    cases.append(("refuse_mlc_closed", closed, "the MLC closes the field"))
    return cases


# ---- DICOM Part 10 files (PS3.10) -----------------------------------------------

SYNTAXES = {
    "explicit": (ExplicitVRLittleEndian, False, True),
    "implicit": (ImplicitVRLittleEndian, True, True),
    "deflated": (DeflatedExplicitVRLittleEndian, False, True),
    "bigendian": (ExplicitVRBigEndian, False, False),
}


def save_part10(ds, path, syntax="explicit", sop_class=None):
    """pydicom's Dataset.save_as with file meta: 128-byte preamble, 'DICM',
    group 0002 and the data set in the transfer syntax named."""
    uid, implicit, little = SYNTAXES[syntax]
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = sop_class or ds.SOPClassUID
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.TransferSyntaxUID = uid
    # fixed, so that the committed files are what this script makes
    meta.ImplementationClassUID = "2.25.1234567890123456789"
    meta.ImplementationVersionName = "FXL_TEST_1"
    ds.file_meta = meta
    ds.is_implicit_VR = implicit
    ds.is_little_endian = little
    ds.save_as(path, write_like_original=False)
    return path


def _dump_value(elem, encoding):
    v = elem.value
    if v is None or v == "":
        return "(no value available)"
    if elem.VR in ("OB", "OW", "UN"):
        return "\\".join("%02x" % b for b in v)
    vals = list(v) if isinstance(v, (list, tuple)) or type(v).__name__ == "MultiValue" else [v]
    text = "\\".join(str(x) for x in vals)
    return "[" + text + "]"


def _dump(ds, depth, encoding, out):
    pad = "  " * depth
    for elem in ds:
        tag = "(%04x,%04x)" % (elem.tag.group, elem.tag.element)
        if elem.VR == "SQ":
            out.append("%s%s SQ (Sequence with undefined length #=%d)" % (pad, tag, len(elem.value)))
            for item in elem.value:
                out.append("%s  (fffe,e000) na (Item with undefined length #=%d)" % (pad, len(item)))
                _dump(item, depth + 2, encoding, out)
                out.append("%s  (fffe,e00d) na (ItemDelimitationItem)" % pad)
            out.append("%s(fffe,e0dd) na (SequenceDelimitationItem)" % pad)
        else:
            out.append("%s%s %s %s" % (pad, tag, elem.VR, _dump_value(elem, encoding)))


def dump2dcm_part10(ds, path, syntax="explicit", encoding="ascii"):
    """The same data set written by dcmtk's dump2dcm from a text dump (a
    second, independent DICOM encoder). Text is written in `encoding`, the
    Python name of the data set's Specific Character Set."""
    flag = {"explicit": "+te", "implicit": "+ti", "deflated": "+td"}[syntax]
    lines = ["# written by make_rtplan.py for dump2dcm (invented test data)",
             "(0002,0002) UI [%s]" % ds.SOPClassUID,
             "(0002,0003) UI [%s]" % ds.SOPInstanceUID]
    _dump(ds, 0, encoding, lines)
    dump = path + ".dump"
    with open(dump, "wb") as f:
        f.write(("\n".join(lines) + "\n").encode(encoding))
    subprocess.run(["dump2dcm", "-q", flag, dump, path], check=True)
    os.remove(dump)
    return path


def latin1_plan():
    """The three-field plan for a patient with accented letters in the name,
    in Specific Character Set ISO_IR 100 (ISO 8859-1, PS3.3 C.12.1.1.2)."""
    plan = three_field()
    plan.update(patient_id="TEST-0100", patient_name="Müller-Lüdenscheidt^Zoë Renée",
                charset="ISO_IR 100", label="PEL-3F-L1")
    return plan


def part10_cases():
    """(file name, plan, writer, syntax, words of the refusal or None)"""
    no_mu = three_field()
    no_mu["drop_in_fraction_group"] = [(1, "BeamMeterset")]
    no_label = three_field()
    no_label["drop"] = ["RTPlanLabel"]
    cases = []
    for syntax in ("explicit", "implicit", "deflated"):
        cases.append(("three_field.%s.dcm" % syntax, three_field(), "pydicom", syntax, None))
    cases += [
        ("three_field.dump2dcm.dcm", three_field(), "dump2dcm", "explicit", None),
        ("three_field.dump2dcm-implicit.dcm", three_field(), "dump2dcm", "implicit", None),
        ("latin1_name.explicit.dcm", latin1_plan(), "pydicom", "explicit", None),
        ("latin1_name.implicit.dcm", latin1_plan(), "pydicom", "implicit", None),
        ("latin1_name.dump2dcm.dcm", latin1_plan(), "dump2dcm", "explicit", None),
        ("electron_single.explicit.dcm", electron_single(), "pydicom", "explicit", None),
        ("refuse_no_meterset.explicit.dcm", no_mu, "pydicom", "explicit",
         "beam 'RLAT' (number 2): Beam Meterset (300A,0086) missing"),
        ("refuse_no_meterset.implicit.dcm", no_mu, "pydicom", "implicit",
         "beam 'RLAT' (number 2): Beam Meterset (300A,0086) missing"),
        ("refuse_no_meterset.dump2dcm.dcm", no_mu, "dump2dcm", "explicit",
         "beam 'RLAT' (number 2): Beam Meterset (300A,0086) missing"),
        ("refuse_no_label.implicit.dcm", no_label, "pydicom", "implicit", "RT Plan Label (300A,0002) is missing"),
        ("refuse_big_endian.dcm", three_field(), "pydicom", "bigendian", "'1.2.840.10008.1.2.2'"),
    ]
    return cases


def ct_image():
    """A tiny CT Image Storage object (SOP class 1.2.840.10008.5.1.4.1.1.2):
    another SOP class, refused."""
    ds = Dataset()
    ds.SOPClassUID = "1.2.840.10008.5.1.4.1.1.2"
    ds.SOPInstanceUID = uid_for("ct")
    ds.Modality = "CT"
    ds.PatientName = "Testperson^Ada"
    ds.PatientID = "TEST-0002"
    ds.Rows = 2
    ds.Columns = 2
    ds.BitsAllocated = 16
    ds.BitsStored = 12
    ds.HighBit = 11
    ds.PixelRepresentation = 0
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    ds.PixelData = bytes(8)
    return ds


def write_part10(outdir, writers=("pydicom", "dump2dcm")):
    """Writes the Part 10 cases and NAME.expect.json beside each, as
    write_case does for the JSON Model."""
    written = []
    for fname, plan, writer, syntax, refuse in part10_cases():
        if writer not in writers:
            continue
        ds = dataset(plan, fname.split(".")[0])
        path = os.path.join(outdir, fname)
        if writer == "pydicom":
            save_part10(ds, path, syntax)
        else:
            dump2dcm_part10(ds, path, syntax, "latin-1" if plan.get("charset") == "ISO_IR 100" else "ascii")
        if refuse:
            expect = {"plan": fname, "source": writer, "refuse": refuse}
        else:
            expect = expected_plan(plan, fname, writer)
        with open(path[:-len(".dcm")] + ".expect.json", "w", encoding="utf-8") as f:
            json.dump(expect, f, indent=1, sort_keys=True, ensure_ascii=False)
            f.write("\n")
        written.append(fname)
    if "pydicom" in writers:
        save_part10(ct_image(), os.path.join(outdir, "refuse_ct_image.dcm"))
        with open(os.path.join(outdir, "refuse_ct_image.expect.json"), "w", encoding="utf-8") as f:
            json.dump({"plan": "refuse_ct_image.dcm", "source": "pydicom",
                       "refuse": "SOP class '1.2.840.10008.5.1.4.1.1.2' is not an RT Plan"}, f, indent=1)
            f.write("\n")
        written.append("refuse_ct_image.dcm")
    return written


# ---- random cases ------------------------------------------------------------------

def random_plan(rng, k):
    n = rng.randint(1, 5)
    beams = []
    for i in range(n):
        radiation = rng.choice(["PHOTON", "PHOTON", "PHOTON", "ELECTRON"])
        x1 = -rng.randint(10, 200) / 2.0
        x2 = rng.randint(10, 200) / 2.0
        y1 = -rng.randint(10, 200) / 2.0
        y2 = rng.randint(10, 200) / 2.0
        b = {"number": i + 1 + rng.randint(0, 3) * 10,
             "name": "F%d-%d" % (k, i + 1) if rng.random() > 0.2 else None,
             "machine": rng.choice(["LINAC1", "LINAC2"]),
             "radiation": radiation,
             "energy": rng.choice([6, 10, 15, 18]) if radiation == "PHOTON" else rng.choice([6, 9, 12, 16]),
             "gantry": round(rng.uniform(0, 359.9), 1),
             "sad_mm": 1000,
             "ssd_mm": round(rng.uniform(800, 1100), 1),
             "mu": round(rng.uniform(5, 600), 1),
             "jaws": {rng.choice(["ASYMX", "X"]): [x1, x2], rng.choice(["ASYMY", "Y"]): [y1, y2]}}
        if rng.random() < 0.5:
            b["collimator"] = round(rng.uniform(0, 359), 1)
        if rng.random() < 0.5:
            b["couch"] = float(rng.choice([0, 10, 350, 90, 270]))
        if rng.random() < 0.3:
            b["beam_dose_gy"] = round(rng.uniform(0.1, 2.0), 3)
        if radiation == "PHOTON" and rng.random() < 0.4:
            b["wedges"] = [{"number": 1, "angle": rng.choice([15, 30, 45, 60]), "id": "W"}]
        if rng.random() < 0.3:
            b["blocks"] = ["TRAY-%d" % rng.randint(1, 9)] * rng.randint(1, 2)
        if radiation == "PHOTON" and rng.random() < 0.4:
            ya, yb = sorted([rng.uniform(y1, y2), rng.uniform(y1, y2)])
            xa, xb = sorted([rng.uniform(x1 - 20, x2), rng.uniform(x1, x2 + 20)])
            if yb - ya > 12 and xb - xa > 12 and min(x2, xb) - max(x1, xa) > 2:
                b["mlc"] = mlc_rectangle(round(xa, 1), round(xb, 1), round(ya, 1), round(yb, 1),
                                         closed_at=round(rng.uniform(-50, 50), 1))
        beams.append(b)
    plan = {"patient_id": "RND-%04d" % rng.randint(0, 9999),
            "patient_name": rng.choice(["Zufall^Anna", "Aleatorio^Juan", "Satunnainen^Aino^M", "Random"]),
            "label": "R%d" % k, "fractions": rng.randint(1, 40), "beams": beams}
    if rng.random() < 0.7:
        plan["prescription_gy"] = round(rng.uniform(2, 70), 2)
    # numbers and names must be unique for the plan to be accepted
    nums = [b["number"] for b in beams]
    names = [b.get("name") or "beam %d" % b["number"] for b in beams]
    if len(set(nums)) != len(nums) or len(set(names)) != len(names):
        for i, b in enumerate(beams):
            b["number"] = i + 1
            b["name"] = "F%d-%d" % (k, i + 1)
    return plan


REFUSALS = [
    ("arc", lambda p: p["beams"][0].update(beam_type="DYNAMIC", end_gantry=(p["beams"][0]["gantry"] + 40) % 360),
     "is an arc"),
    ("proton", lambda p: p["beams"][-1].update(radiation="PROTON"), "radiation type 'PROTON'"),
    ("ion", lambda p: p["beams"][0].update(radiation="ION"), "radiation type 'ION'"),
    ("groups", lambda p: p.update(fraction_groups=2), "fraction groups"),
    ("nossd", lambda p: p["beams"][0].pop("ssd_mm"), "Source to Surface Distance (300A,0130) is missing"),
    ("nomu", lambda p: p["beams"][0].pop("mu"), "Beam Meterset (300A,0086) missing"),
    ("noid", lambda p: p.update(drop=["PatientID"]), "Patient ID (0010,0020) is missing"),
]


def random_cases(seed, count=6):
    rng = random.Random(seed)
    cases = []
    for k in range(count):
        cases.append(("random_%d_%d" % (seed, k), random_plan(rng, k), None))
    for name, mutate, words in REFUSALS:
        plan = random_plan(rng, 99)
        mutate(plan)
        cases.append(("random_%d_refuse_%s" % (seed, name), plan, words))
    return cases


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("outdir")
    ap.add_argument("--seed", type=int, help="random plans from this seed instead of the fixed cases")
    ap.add_argument("--dcm2json", action="store_true", help="also convert every plan with dcmtk's dcm2json")
    ap.add_argument("--part10", action="store_true", help="write the DICOM Part 10 cases instead")
    args = ap.parse_args()
    if args.part10:
        if not shutil.which("dump2dcm"):
            sys.exit("make_rtplan.py: error: dump2dcm (Debian package dcmtk) is not installed")
        os.makedirs(args.outdir, exist_ok=True)
        for f in write_part10(args.outdir):
            print(f)
        return
    if args.dcm2json and not shutil.which("dcm2json"):
        sys.exit("make_rtplan.py: error: dcm2json (Debian package dcmtk) is not installed")
    os.makedirs(args.outdir, exist_ok=True)
    cases = random_cases(args.seed) if args.seed is not None else fixed_cases()
    for name, plan, refuse in cases:
        for f in write_case(args.outdir, name, plan, refuse, args.dcm2json):
            print(f)


if __name__ == "__main__":
    main()

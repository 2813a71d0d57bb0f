"""Check values for the independent expected-dose model, computed here a
second time from the published formalism, independently of the C code:

AAPM TG-71 (Gibbons et al., Med. Phys. 41, 2014, 031501), the monitor-unit
equation run backwards (AAPM TG-71, Gibbons et al., Med. Phys. 2014, docs/expected-dose.md):
    entrance, d = d_max:  D = MU x D0' x S_c(r_c) x S_p(r_d) x WF x TF x ((SSD0+d0)/(SSD+d_max))^2
    exit, d = t - d_max:  D = MU x D0' x S_c(r_c) x S_p(r_x) x TMR(d, r_x) x WF x TF x ((SSD0+d0)/(SSD+d))^2
    r_d = r_field x (SSD + d)/SAD (the field at the point, diverging from the SAD plane)
Equivalent square 2XY/(X+Y) (Sterling rule). Tables: linear interpolation in
one parameter, bilinear in two (physics: interpolation inside the table only).

The beam data are tests/data/beams/linac1_6x.json (invented)."""
import json
import os

from fxlcli import DATA

BEAM_DATA = os.path.join(DATA, "beams", "linac1_6x.json")


def load(path=BEAM_DATA):
    with open(path, encoding="utf-8") as f:
        return json.load(f)


def eqsq(x, y):
    return 2.0 * x * y / (x + y)  # Sterling rule


def interp(xs, ys, x):
    """Linear interpolation; never outside the table."""
    for i in range(len(xs) - 1):
        if xs[i] <= x <= xs[i + 1]:
            return ys[i] + (x - xs[i]) / (xs[i + 1] - xs[i]) * (ys[i + 1] - ys[i])
    raise ValueError("%g outside the table %s..%s" % (x, xs[0], xs[-1]))


def bilinear(xs, ys, rows, x, y):
    """rows[j][i] is the value at (xs[i], ys[j]): interpolate along x in the
    two rows around y, then along y (the same as the weighted corners)."""
    for j in range(len(ys) - 1):
        if ys[j] <= y <= ys[j + 1]:
            a = interp(xs, rows[j], x)
            b = interp(xs, rows[j + 1], x)
            return a + (y - ys[j]) / (ys[j + 1] - ys[j]) * (b - a)
    raise ValueError("%g outside the table" % y)


def expected(bd, mu, ssd, x, y, wedge=0, tray=False, point="entrance", thickness=None, shaped_eqsq=None):
    """The TG-71 dose at the entrance or exit point (see the module docstring);
    returns (dose, factors)."""
    dmax = bd["dmax_cm"]
    sad = bd["sad_cm"]
    d0 = bd["reference"]["dose_cgy_per_mu"]
    dnorm = bd["reference"]["distance_cm"]
    of = bd["output_factors"]
    rc = eqsq(x, y)
    rfield = shaped_eqsq if shaped_eqsq else rc
    depth = dmax if point == "entrance" else thickness - dmax
    spd = ssd + depth
    rd = rfield * spd / sad
    sc = interp(of["field_size_cm"], of["sc"], rc)
    sp = interp(of["field_size_cm"], of["sp"], rd)
    wf = 1.0 if wedge == 0 else {w["angle_deg"]: w["factor"] for w in bd["wedges"]}[wedge]
    tf = bd["tray_factor"] if tray else 1.0
    tmr = 1.0
    if point == "exit":
        t = bd["tmr"]
        tmr = bilinear(t["field_size_cm"], t["depth_cm"], t["values"], rd, depth)
    isf = (dnorm / spd) ** 2
    dose = mu * d0 * sc * sp * tmr * wf * tf * isf
    return dose, {"sc": sc, "sp": sp, "tmr": tmr, "wedge_factor": wf, "tray_factor": tf,
                  "inverse_square": isf, "rc_cm": rc, "rd_cm": rd, "depth_cm": depth, "spd_cm": spd}


def crosscheck_deviation(tps, model):
    """(D_TPS - D_model)/D_model x 100, rounded to 0.01 % (docs/expected-dose.md section 4)."""
    return round((tps - model) / model * 100.0, 2)

"""The report fonts (docs/reports.md, "Fonts and text"): a report whose text
the build's subset of DejaVu Sans covers embeds the subset; a report with a
character outside it (here Armenian and Georgian names, which the full
DejaVu Sans has) embeds the full font for that text; a character neither
font has still reaches the text layer. Every name, plan and field below is
invented test data.

Checked against outside references: poppler-utils (pdffonts lists the
embedded fonts, pdftotext gives the text back, both without a warning on
stderr), qpdf (extracts the embedded font programs) and fontTools (Debian
python3-fonttools, reads them: glyph count in 'maxp', the 'cmap'), with the
Debian font files of fonts-dejavu-core as the reference for the full fonts."""
import io
import json
import os
import re
import subprocess
import unittest

from fxlcli import BIN, main
from test_report import Clinic, ReportTestCase, pdftext

try:
    from fontTools.ttLib import TTFont
except ImportError:     # python3-fonttools (tools/install-deps.sh)
    TTFont = None

FONT_DIR = "/usr/share/fonts/truetype/dejavu"     # fonts-dejavu-core
SUBSET_DIR = os.path.join(os.path.dirname(os.path.abspath(BIN)), "fonts")
SUBSET = {"regular": os.path.join(SUBSET_DIR, "fxledger-DejaVuSans-subset.ttf"),
          "bold": os.path.join(SUBSET_DIR, "fxledger-DejaVuSans-Bold-subset.ttf")}
FULL = {"regular": os.path.join(FONT_DIR, "DejaVuSans.ttf"),
        "bold": os.path.join(FONT_DIR, "DejaVuSans-Bold.ttf")}


def pdffonts(path):
    """Font names pdffonts lists (subset tag stripped), and its stderr."""
    r = subprocess.run(["pdffonts", path], capture_output=True, text=True, check=True)
    names = [line.split()[0].split("+", 1)[-1] for line in r.stdout.splitlines()[2:] if line.strip()]
    return names, r.stderr


def embedded_fonts(path):
    """{base font name: TTFont} of every embedded TrueType program (FontFile2),
    extracted by qpdf."""
    doc = json.loads(subprocess.run(["qpdf", "--json=2", path], capture_output=True, text=True,
                                    check=True).stdout)
    objs = doc["qpdf"][1]      # qpdf's JSON version 2: "obj:N 0 R" -> {"value": ...}
    out = {}
    for key, obj in objs.items():
        obj = obj.get("value") if isinstance(obj, dict) else None
        if not isinstance(obj, dict) or obj.get("/Type") != "/FontDescriptor":
            continue
        ref = obj.get("/FontFile2")
        if not ref:
            continue
        num = ref.split()[0]
        data = subprocess.run(["qpdf", "--show-object=" + num, "--filtered-stream-data", path],
                              capture_output=True, check=True).stdout
        # "/HPDFAA+DejaVuSans-FxlSubset,Book": tag, PostScript name, style
        name = obj["/FontName"].lstrip("/").split("+", 1)[-1].split(",")[0]
        out[name] = TTFont(io.BytesIO(data))
    return out


def glyphs(path):
    return TTFont(path)["maxp"].numGlyphs


@unittest.skipIf(TTFont is None, "needs python3-fonttools")
class FontSubsetTest(ReportTestCase):
    # Invented people with Latin, Greek and Cyrillic names; the technique
    # and field names carry the symbols the check asks for.
    SUBSET_PEOPLE = [("MRN-G", "Παπαδόπουλος", "Δημήτρης"), ("MRN-C", "Смирнова", "Ольга"),
                     ("MRN-L", "Ångström-Núñez", "Zoë Łucja")]
    TECHNIQUE = "Arc 30° ±2° × 2 – test"
    # Invented Armenian and Georgian names: in DejaVu Sans, not in the subset.
    ARMENIAN = ("MRN-A", "Հակոբյան", "Արամ")
    GEORGIAN = ("MRN-K", "ბერიძე", "ნინო")
    # An invented Japanese name: in neither font.
    CJK = ("MRN-J", "山田", "花子")

    def setUp(self):
        super().setUp()
        if not all(os.path.isfile(p) for p in SUBSET.values()):
            self.skipTest("this build made no font subset (no fontTools at configure time)")
        c = Clinic(self.fx.db)
        for mrn, fam, giv in self.SUBSET_PEOPLE + [self.ARMENIAN, self.GEORGIAN, self.CJK]:
            pid = c.patient(mrn, fam, giv)
            plan = c.plan(pid, "P1", site="Tête et cou", technique=self.TECHNIQUE)
            f = c.field(plan, "Поле-1")
            for n in range(1, 4):
                c.measure(plan, f, n, "2026-10-%02dT09:00:00Z" % (4 + n), (n - 2) * 4.1)
        c.commit()

    def assertFontsClean(self, path):
        names, err = pdffonts(path)
        self.assertEqual(err, "", "pdffonts warns on %s" % path)
        return names

    def test_subset_fonts_are_what_the_build_says(self):
        """The subset files: far fewer glyphs than Debian's fonts, the
        renamed PostScript name, and a cmap that maps what the reports print."""
        for weight in ("regular", "bold"):
            sub = TTFont(SUBSET[weight])
            self.assertLess(sub["maxp"].numGlyphs, glyphs(FULL[weight]) // 2)
            self.assertTrue(sub["name"].getDebugName(6).endswith("-FxlSubset"))
            cmap = sub.getBestCmap()
            for ch in "Aé±°×·–—…−≤≥µΔΩжЖ‰✓":
                self.assertIn(ord(ch), cmap, "%r (U+%04X) in the %s subset" % (ch, ord(ch), weight))
            for ch in "Աაẞ":   # Armenian, Georgian: the full font only
                if ord(ch) in TTFont(FULL[weight]).getBestCmap():
                    self.assertNotIn(ord(ch), cmap)
            # libharu reads the Windows Unicode BMP cmap (format 4) and these tables
            for tag in ("OS/2", "cmap", "cvt ", "fpgm", "glyf", "head", "hhea", "hmtx", "loca",
                        "maxp", "name", "post", "prep"):
                self.assertIn(tag, sub.reader.tables, tag)
            self.assertIsNotNone(sub["cmap"].getcmap(3, 1))
            self.assertEqual(sub["cmap"].getcmap(3, 1).format, 4)
            # the licence of the fonts goes with the subset
            self.assertIn("Bitstream", sub["name"].getDebugName(13) or "")
            # reproducible: the date in 'head' is the source font's, not the build's
            self.assertEqual(sub["head"].modified, TTFont(FULL[weight])["head"].modified)

    def test_latin_greek_cyrillic_report_embeds_only_the_subset(self):
        for mrn, fam, giv in self.SUBSET_PEOPLE:
            out = self.fx.path(mrn + ".pdf")
            self.report("patient", mrn, "--out", out)
            names = self.assertFontsClean(out)
            self.assertEqual(sorted(names), ["DejaVuSans-Bold-FxlSubset,Bold",
                                             "DejaVuSans-FxlSubset,Book"], names)
            emb = embedded_fonts(out)
            self.assertEqual(emb["DejaVuSans-FxlSubset"]["maxp"].numGlyphs, glyphs(SUBSET["regular"]))
            self.assertEqual(emb["DejaVuSans-Bold-FxlSubset"]["maxp"].numGlyphs,
                             glyphs(SUBSET["bold"]))
            t = pdftext(out, layout=False)
            self.assertIn("%s, %s" % (fam, giv), t)
            self.assertIn(self.TECHNIQUE, t)
            self.assertIn("Поле-1", t)
            self.assertIn("Tête et cou", t)
            self.assertIn("±", t)
        out = self.fx.path("month.pdf")
        self.report("month", "2026-10", "--out", out)
        # the month's text (no patient names in sections 1 to 6) is covered
        self.assertEqual(sorted(self.assertFontsClean(out)),
                         ["DejaVuSans-Bold-FxlSubset,Bold", "DejaVuSans-FxlSubset,Book"])
        self.assertIn("Tête et cou / " + self.TECHNIQUE, pdftext(out))

    def test_name_outside_the_subset_embeds_the_full_font(self):
        for mrn, fam, giv in (self.ARMENIAN, self.GEORGIAN):
            out = self.fx.path(mrn + ".pdf")
            self.report("patient", mrn, "--out", out)
            names = self.assertFontsClean(out)
            self.assertIn("DejaVuSans,Book", names)          # the full font, for the name
            self.assertIn("DejaVuSans-FxlSubset,Book", names)  # the rest of the text
            emb = embedded_fonts(out)
            full = emb["DejaVuSans"]
            self.assertEqual(full["maxp"].numGlyphs, glyphs(FULL["regular"]))
            for ch in fam + giv:
                self.assertIn(ord(ch), full.getBestCmap())
                self.assertNotIn(ord(ch), emb["DejaVuSans-FxlSubset"].getBestCmap())
            t = pdftext(out, layout=False)
            self.assertIn("%s, %s" % (fam, giv), t)
            self.assertIn(self.TECHNIQUE, t)
            # the name is in the running header of every page
            self.assertEqual(t.count(fam), len(re.findall(r"Page \d+ of", t)) + 1)

    def test_character_in_neither_font_still_reaches_the_text(self):
        """As before the subset: a character DejaVu Sans lacks (CJK) prints
        as the font's missing-glyph box and extracts as itself; the full font
        carries it, so the subset changes nothing for it."""
        self.assertNotIn(ord("山"), TTFont(FULL["regular"]).getBestCmap())
        out = self.fx.path("cjk.pdf")
        self.report("patient", "MRN-J", "--out", out)
        self.assertIn("DejaVuSans,Book", self.assertFontsClean(out))
        self.assertIn("山田, 花子", pdftext(out, layout=False))


if __name__ == "__main__":
    main()

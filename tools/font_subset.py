#!/usr/bin/python3
"""Makes the subset of DejaVu Sans (regular and bold) that the PDF reports
embed, and the C table of the characters it covers (docs/reports.md, "Fonts
and text"). Run by the build (CMakeLists.txt) under Debian's python3 with
python3-fonttools:

    font_subset.py SRC_DIR OUT_DIR COVER_C

SRC_DIR holds DejaVuSans.ttf and DejaVuSans-Bold.ttf (fonts-dejavu-core);
OUT_DIR receives fxledger-DejaVuSans-subset.ttf and
fxledger-DejaVuSans-Bold-subset.ttf; COVER_C is the generated C file with
the code points each subset maps (the program uses the full font for any
text with a character outside them).

fontTools.subset (https://fonttools.readthedocs.io/en/latest/subset/):
glyphs of the listed code points and their composite components, glyph
order renumbered; cmap, hmtx, loca, glyf, hinting tables (cvt, fpgm, prep,
gasp), OS/2, post (without glyph names), name (every Windows record: the
copyright and licence of the fonts travel with them) kept; the layout tables (GSUB, GPOS,
GDEF, MATH, kern) dropped, as libharu does no shaping or kerning. The
PostScript and full names get a suffix, so the subset and the full font can
be told apart in a PDF and libharu keeps them as two fonts.
"""
import os
import sys

from fontTools import subset
from fontTools.ttLib import TTFont

# What the subset covers: Unicode blocks (The Unicode Standard, Blocks.txt)
# and single symbols. Each run of code points is one segment of the cmap,
# and libharu looks every one of the 65,536 UTF-16 codes up by a linear
# search over the segments when it loads a font, so the list keeps whole
# blocks that DejaVu Sans covers without gaps, and single characters
# elsewhere. Everything else is drawn in the full font.
RANGES = [
    (0x0020, 0x007E),   # Basic Latin (printable)
    (0x00A0, 0x00FF),   # Latin-1 Supplement: degree, plus-minus, micro, times, middle dot
    (0x0100, 0x017F),   # Latin Extended-A
    (0x0180, 0x024F),   # Latin Extended-B
    (0x0250, 0x02AF),   # IPA Extensions (letters of some African alphabets)
    (0x0370, 0x03FF),   # Greek and Coptic
    (0x0400, 0x04FF),   # Cyrillic
    (0x0500, 0x052F),   # Cyrillic Supplement
    (0x2000, 0x206F),   # General Punctuation: dashes, quotes, bullet, ellipsis, per mille
    (0x20AC, 0x20AC),   # euro sign
    (0x2116, 0x2116),   # numero sign
    (0x2122, 0x2122),   # trade mark sign
    (0x2190, 0x21FF),   # Arrows
    (0x2200, 0x22FF),   # Mathematical Operators: minus, less/greater-than or equal, almost equal
    (0x2500, 0x257F),   # Box Drawing
    (0x2580, 0x259F),   # Block Elements
    (0x25A0, 0x25FF),   # Geometric Shapes: squares, triangles, circles
    (0x26A0, 0x26A0),   # warning sign
    (0x2713, 0x2718),   # check marks and ballot crosses
]

FONTS = [("DejaVuSans.ttf", "fxledger-DejaVuSans-subset.ttf", "regular"),
         ("DejaVuSans-Bold.ttf", "fxledger-DejaVuSans-Bold-subset.ttf", "bold")]

SUFFIX_PS = "-FxlSubset"
SUFFIX_FULL = " (fxledger subset)"


def options():
    o = subset.Options()
    o.layout_features = []
    o.drop_tables += ["GSUB", "GPOS", "GDEF", "MATH", "kern", "FFTM"]
    o.name_IDs = ["*"]
    o.name_languages = ["*"]
    o.name_legacy = False         # Windows records only; the Macintosh ones repeat them
    o.glyph_names = False         # 'post' format 3: libharu and PDF readers use the cmap
    o.notdef_glyph = True
    o.notdef_outline = True
    o.recalc_timestamp = False    # reproducible: head.modified of the source
    o.hinting = True
    return o


def rename(font):
    """Suffix on the PostScript name (ID 6) and the full and unique names
    (IDs 3, 4): libharu takes the PostScript name as the font's name."""
    for rec in font["name"].names:
        if rec.nameID in (3, 4, 6):
            text = rec.toUnicode()
            rec.string = text + (SUFFIX_PS if rec.nameID == 6 else SUFFIX_FULL)


def ranges_of(codes):
    out = []
    for c in sorted(codes):
        if out and out[-1][1] == c - 1:
            out[-1][1] = c
        else:
            out.append([c, c])
    return out


def main():
    src, out_dir, cover_c = sys.argv[1:4]
    os.makedirs(out_dir, exist_ok=True)
    wanted = set()
    for lo, hi in RANGES:
        wanted.update(range(lo, hi + 1))
    tables = []
    files = []
    for name, out_name, key in FONTS:
        # recalcTimestamp=False: head.modified stays the source font's, so the
        # build gives the same bytes every time
        font = TTFont(os.path.join(src, name), recalcTimestamp=False)
        have = set(font.getBestCmap())
        codes = sorted(wanted & have)
        s = subset.Subsetter(options())
        s.populate(unicodes=codes)
        s.subset(font)
        rename(font)
        path = os.path.join(out_dir, out_name)
        font.save(path + ".tmp")
        os.replace(path + ".tmp", path)
        # The cover table is read back from the file written, so it states
        # what the embedded font really maps.
        got = TTFont(path).getBestCmap()
        tables.append((key, ranges_of(c for c in got if c >= 0x20)))
        files.append((key, out_name, os.path.getsize(path)))
    lines = ["/* Generated by tools/font_subset.py: the code points each report font",
             " * subset maps (cmap of the files written). Do not edit. */",
             '#include "report/fontcover.h"', ""]
    for key, rs in tables:
        lines.append("const rpt_cover_range rpt_cover_%s[] = {" % key)
        lines += ["    {0x%04X, 0x%04X}," % (lo, hi) for lo, hi in rs]
        lines.append("};")
        lines.append("const size_t rpt_cover_%s_n = %d;" % (key, len(rs)))
        lines.append("")
    for key, out_name, size in files:
        lines.append('const char rpt_subset_%s_file[] = "%s";' % (key, out_name))
        lines.append("const long rpt_subset_%s_size = %d;" % (key, size))
    lines.append("")
    with open(cover_c + ".tmp", "w", encoding="ascii") as f:
        f.write("\n".join(lines))
    os.replace(cover_c + ".tmp", cover_c)


if __name__ == "__main__":
    main()

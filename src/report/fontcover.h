/* The subset of DejaVu Sans the reports embed when it can show the text
 * (docs/reports.md, "Fonts and text"). The build makes the subset fonts with
 * tools/font_subset.py (fontTools) and generates the tables below from the
 * cmap of the files it wrote; a build without fontTools generates empty
 * tables, and the reports then use the full fonts. Private to src/report. */
#ifndef FXL_REPORT_FONTCOVER_H
#define FXL_REPORT_FONTCOVER_H

#include <stddef.h>

/* Code points lo..hi (inclusive) that the subset maps to a glyph. */
typedef struct rpt_cover_range {
    unsigned lo, hi;
} rpt_cover_range;

/* Ranges in ascending order; n == 0 when the build made no subset. */
extern const rpt_cover_range rpt_cover_regular[];
extern const size_t rpt_cover_regular_n;
extern const rpt_cover_range rpt_cover_bold[];
extern const size_t rpt_cover_bold_n;

/* File names of the subsets (in the build tree's fonts/ directory beside
 * the program, installed in <datadir>/fxledger/fonts) and their sizes in
 * bytes, so that a file from another build is not taken for them. */
extern const char rpt_subset_regular_file[];
extern const char rpt_subset_bold_file[];
extern const long rpt_subset_regular_size;
extern const long rpt_subset_bold_size;

#endif

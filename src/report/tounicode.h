/* A correct ToUnicode CMap for the report fonts. libharu 2.3 writes, as the
 * ToUnicode stream of a UTF-8 TrueType font, its encoding CMap (a
 * "begincidrange" table), which is not a ToUnicode CMap: poppler warns
 * "Invalid 'begincidrange' operator in ToUnicode CMap" and text extraction,
 * copying and searching may fail. Private to src/report. */
#ifndef FXL_REPORT_TOUNICODE_H
#define FXL_REPORT_TOUNICODE_H

#include <hpdf.h>

/* Replaces the content of the font's ToUnicode stream with a CMap that maps
 * each two-byte code (libharu's UTF-8 encoder writes UTF-16BE code units
 * of the Basic Multilingual Plane) to the same Unicode value. Returns 0, or
 * -1 when the font has no such stream or the stream cannot be written. */
int rpt_tounicode_fix(HPDF_Font font);

#endif

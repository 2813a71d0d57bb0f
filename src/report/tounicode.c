/* ToUnicode CMap of the report fonts (PDF 1.7, ISO 32000-1 section 9.10.3;
 * CMap syntax of Adobe Technical Note 5014): codes are UTF-16BE code units,
 * mapped to themselves with bfrange entries that each cover one high byte
 * (a bfrange may vary only the last byte) and at most 100 entries a block. */
#include "report/tounicode.h"

#include <stdio.h>

#include <hpdf_objects.h>
#include <hpdf_streams.h>

int rpt_tounicode_fix(HPDF_Font font)
{
    static const char head[] =
        "/CIDInit /ProcSet findresource begin\n"
        "12 dict begin\n"
        "begincmap\n"
        "/CIDSystemInfo << /Registry (Adobe) /Ordering (UCS) /Supplement 0 >> def\n"
        "/CMapName /Adobe-Identity-UCS def\n"
        "/CMapType 2 def\n"
        "1 begincodespacerange\n"
        "<0000> <FFFF>\n"
        "endcodespacerange\n";
    static const char tail[] =
        "endcmap\n"
        "CMapName currentdict /CMap defineresource pop\n"
        "end\n"
        "end\n";
    HPDF_Dict tu;
    char line[64];
    int hi, n = 0, in_block = 0, total = 0;

    if (!font)
        return -1;
    tu = (HPDF_Dict)HPDF_Dict_GetItem((HPDF_Dict)font, "ToUnicode", HPDF_OCLASS_DICT);
    if (!tu || !tu->stream)
        return -1;
    HPDF_MemStream_FreeData(tu->stream);
    if (HPDF_Stream_WriteStr(tu->stream, head) != HPDF_OK)
        return -1;
    /* 0xD8..0xDF are surrogates, not characters of their own */
    for (hi = 0; hi <= 0xFF; hi++)
        if (hi < 0xD8 || hi > 0xDF)
            total++;
    for (hi = 0; hi <= 0xFF; hi++) {
        if (hi >= 0xD8 && hi <= 0xDF)
            continue;
        if (!in_block) {
            int left = total - n, size = left > 100 ? 100 : left;
            snprintf(line, sizeof line, "%d beginbfrange\n", size);
            if (HPDF_Stream_WriteStr(tu->stream, line) != HPDF_OK)
                return -1;
            in_block = size;
        }
        snprintf(line, sizeof line, "<%02X00> <%02XFF> <%02X00>\n", hi, hi, hi);
        if (HPDF_Stream_WriteStr(tu->stream, line) != HPDF_OK)
            return -1;
        n++;
        if (--in_block == 0 && HPDF_Stream_WriteStr(tu->stream, "endbfrange\n") != HPDF_OK)
            return -1;
    }
    return HPDF_Stream_WriteStr(tu->stream, tail) == HPDF_OK ? 0 : -1;
}

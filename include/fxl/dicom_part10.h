/* DICOM Part 10 files (PS3.10 section 7: a 128-byte preamble, the magic
 * "DICM", the file meta information of group 0002, then the data set) read
 * with DCMTK's dcmdata and handed on in the DICOM JSON Model (PS3.18 Annex
 * F), so that fxl_dicom_plan_parse keeps every mapping and refusal rule.
 * Transfer syntaxes: implicit and explicit VR little endian and deflated
 * explicit VR little endian; any other is refused by its name. Text is
 * converted to UTF-8 from the Specific Character Set (0008,0005) before the
 * conversion. docs/dicom-import.md. No database. */
#ifndef FXL_DICOM_PART10_H
#define FXL_DICOM_PART10_H

#include <stddef.h>

#include "fxl/fxl.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Bytes before the magic "DICM" (PS3.10 7.1). */
#define FXL_DICOM_PREAMBLE_LEN 128

/* 1 when data[0..len) starts as a Part 10 file: 128 bytes of preamble
 * (any content) and "DICM"; else 0. Reads no byte past len. */
int fxl_dicom_part10_detect(const unsigned char *data, size_t len);

/* Reads the Part 10 file in data[0..len) (`source` names it in messages)
 * and writes its data set in the DICOM JSON Model, UTF-8, into *json
 * (malloc'ed, NUL-terminated after *json_len bytes; the caller frees it).
 * Refuses with FXL_EINVAL and a one-line message, *json NULL: no Part 10
 * preamble, a file meta without Transfer Syntax UID (0002,0010), a transfer
 * syntax other than the three above (named), a file cut short or damaged
 * (DCMTK's reason), a Specific Character Set that cannot be converted, text
 * that is not valid in it. FXL_EIO when memory runs out. */
int fxl_dicom_part10_to_json(fxl_ctx *ctx, const unsigned char *data, size_t len, const char *source,
                             char **json, size_t *json_len);

/* The reader itself (src/io/dicom_part10.cpp), the same contract. It lives
 * in the module fxledger-dicom.so, which fxl_dicom_part10_to_json loads;
 * the unit tests and fuzzers link it in. */
int fxl_dicom_part10_read(fxl_ctx *ctx, const unsigned char *data, size_t len, const char *source,
                          char **json, size_t *json_len);

#ifdef __cplusplus
}
#endif

#endif

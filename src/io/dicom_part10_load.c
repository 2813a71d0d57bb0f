/* The program's side of the DICOM Part 10 reader (include/fxl/dicom_part10.h):
 * the preamble check, and the reader in the module fxledger-dicom.so,
 * loaded at the first Part 10 file (include/fxl/module.h). */
#include <stdio.h>
#include <string.h>

#include "fxl/dicom_part10.h"
#include "fxl/module.h"

typedef int (*part10_reader)(fxl_ctx *, const unsigned char *, size_t, const char *, char **, size_t *);

/* Weak: defined when the reader is linked in (the unit tests and fuzzers
 * link src/io/dicom_part10.cpp); NULL in the program, which loads it. */
#pragma weak fxl_dicom_part10_read

int fxl_dicom_part10_detect(const unsigned char *data, size_t len)
{
    return data && len >= FXL_DICOM_PREAMBLE_LEN + 4 && memcmp(data + FXL_DICOM_PREAMBLE_LEN, "DICM", 4) == 0;
}

int fxl_dicom_part10_to_json(fxl_ctx *ctx, const unsigned char *data, size_t len, const char *source,
                             char **json, size_t *json_len)
{
    part10_reader read = fxl_dicom_part10_read;
    char why[512];

    if (json && json_len) {
        *json = NULL;
        *json_len = 0;
    }
    if (!read) {
        if ((read = (part10_reader)fxl_module_symbol("dicom", "fxl_dicom_part10_read", why, sizeof why)) == NULL)
            return fxl_fail(ctx, FXL_EIO, "cannot read DICOM file '%s': %s", source ? source : "RT Plan", why);
    }
    return read(ctx, data, len, source, json, json_len);
}

/* libFuzzer harness: DICOM RT Plans as DICOM Part 10 files, read with DCMTK
 * (fxl_dicom_plan_parse_part10).
 * The parser's contract is checked in fuzz_checks.h; a broken promise aborts
 * so that libFuzzer keeps the input. Build and run: `make fuzz`
 * (docs/robustness.md). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include "fuzz_checks.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *why = fuzz_check_dicom_part10(data, size);

    if (why) {
        fprintf(stderr, "dicom_part10: contract broken: %s\n", why);
        abort();
    }
    return 0;
}

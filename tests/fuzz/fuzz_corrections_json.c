/* libFuzzer harness: correction-table files (fxl_corr_file_parse).
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
    const char *why = fuzz_check_corrections_json(data, size);

    if (why) {
        fprintf(stderr, "corrections_json: contract broken: %s\n", why);
        abort();
    }
    return 0;
}

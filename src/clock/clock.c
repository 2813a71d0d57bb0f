/* The clock of fxledger, compiled twice from this one file (CMakeLists.txt):
 * into the program users run, where it is the system clock and nothing else,
 * and with FXL_TEST_CLOCK defined into the test build (fxledger-testclock and
 * the unit tests), where the environment variable FXLEDGER_NOW fixes it
 * (or FXLEDGER_NOW_FILE names a file holding that time, read at each call).
 * The program users run therefore contains no code that reads FXLEDGER_NOW:
 * nobody can backdate an audit row or a review event by setting it
 * (docs/audit.md). The library calls fxl_clock_fixed() from fxl_now(). */
#include <stddef.h>

#include "fxl/fxl.h"

#ifdef FXL_TEST_CLOCK
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int fxl_clock_fixed(char buf[FXL_TIME_LEN])
{
    const char *fixed = getenv("FXLEDGER_NOW");
    const char *file = getenv("FXLEDGER_NOW_FILE");
    char line[FXL_TIME_LEN + 2];

    /* A long-running test process (fxledger serve under the web tests)
     * reads its fixed time from a file at each call, so a test can move
     * the clock without restarting it. */
    if (file && *file) {
        FILE *f = fopen(file, "r");
        if (f) {
            if (fgets(line, sizeof line, f)) {
                line[strcspn(line, "\r\n")] = '\0';
                fixed = line;
            }
            fclose(f);
        }
    }

    /* Only a well-formed, real UTC time is taken; anything else is never
     * stamped on the record (docs/hazards.md). */
    if (fixed && strlen(fixed) == FXL_TIME_LEN - 1 && fxl_time_normalize(buf, fixed, 0) == 0 &&
        strcmp(buf, fixed) == 0)
        return 1;
    return 0;
}

int fxl_clock_is_test(void)
{
    return 1;
}
#else
int fxl_clock_fixed(char buf[FXL_TIME_LEN])
{
    (void)buf;
    return 0;
}

int fxl_clock_is_test(void)
{
    return 0;
}
#endif

/* Replays every input the fuzzers found a fault with (tests/fuzz/regressions/
 * <parser>/) and the seed corpora (tests/fuzz/corpus/<parser>/) through the
 * parsers, with the same contract checks as the libFuzzer harnesses
 * (tests/fuzz/fuzz_checks.h). In the sanitizer build (make sanitize) a
 * memory error, leak or undefined behaviour on any of them fails the run;
 * in every build a broken contract does. docs/robustness.md lists the
 * findings. */
#include <dirent.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cmocka.h>

#include "../fuzz/fuzz_checks.h"

typedef const char *(*check_fn)(const uint8_t *data, size_t size);

/* tests/ of the source tree, from this file's own path (CMake compiles it
 * by its absolute path). */
static void tests_dir(char *out, size_t size)
{
    const char *slash;

    snprintf(out, size, "%s", __FILE__);
    slash = strrchr(out, '/');           /* .../tests/unit/test_... */
    if (slash)
        out[slash - out] = '\0';
    slash = strrchr(out, '/');           /* .../tests/unit */
    if (slash)
        out[slash - out] = '\0';
}

static int read_file(uint8_t **out, size_t *size, const char *path)
{
    FILE *f = fopen(path, "rb");
    uint8_t *buf = NULL;
    long n;
    int rc = -1;

    *out = NULL;
    *size = 0;
    if (!f)
        return -1;
    if (fseek(f, 0, SEEK_END) != 0 || (n = ftell(f)) < 0 || fseek(f, 0, SEEK_SET) != 0)
        goto cleanup;
    buf = malloc((size_t)n + 1);
    if (!buf || (n > 0 && fread(buf, 1, (size_t)n, f) != (size_t)n))
        goto cleanup;
    *out = buf;
    *size = (size_t)n;
    buf = NULL;
    rc = 0;
cleanup:
    free(buf);
    fclose(f);
    return rc;
}

static int by_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Runs every regular file of tests/fuzz/<kind>/<parser>/ through `check`;
 * returns how many were replayed. A missing directory fails the test when
 * `required`, else counts as empty (git keeps no empty directory). */
static size_t replay_dir(const char *kind, const char *parser, check_fn check, int required)
{
    char base[1024], dir[2048], path[4096];
    char **names = NULL;
    size_t n = 0, cap = 0, i;
    struct dirent *e;
    DIR *d;

    tests_dir(base, sizeof base);
    snprintf(dir, sizeof dir, "%s/fuzz/%s/%s", base, kind, parser);
    d = opendir(dir);
    if (!d && !required)
        return 0;
    if (!d)
        fail_msg("cannot open %s", dir);
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.')
            continue;
        if (n == cap) {
            cap = cap ? 2 * cap : 64;
            names = realloc(names, cap * sizeof *names);
            assert_non_null(names);
        }
        names[n] = strdup(e->d_name);
        assert_non_null(names[n]);
        n++;
    }
    closedir(d);
    if (n)
        qsort(names, n, sizeof *names, by_name);
    for (i = 0; i < n; i++) {
        uint8_t *data;
        size_t size;
        const char *why;
        struct stat st;

        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        if (stat(path, &st) != 0 || !S_ISREG(st.st_mode))
            continue;
        if (read_file(&data, &size, path) != 0)
            fail_msg("cannot read %s", path);
        why = check(data, size);
        free(data);
        if (why)
            fail_msg("%s: %s", path, why);
    }
    for (i = 0; i < n; i++)
        free(names[i]);
    free(names);
    return n;
}

/* Both directories of one parser: the seed corpus must not be empty (the
 * harness starts from it); the regressions may be. */
static void replay(const char *parser, check_fn check)
{
    assert_true(replay_dir("corpus", parser, check, 1) >= 3);
    replay_dir("regressions", parser, check, 0);
}

static void test_fuzz_regressions_plan_json(void **state)
{
    (void)state;
    replay(FUZZ_PLAN, fuzz_check_plan_json);
}

static void test_fuzz_regressions_readings_json(void **state)
{
    (void)state;
    replay(FUZZ_READINGS, fuzz_check_readings_json);
}

static void test_fuzz_regressions_corrections_json(void **state)
{
    (void)state;
    replay(FUZZ_CORRECTIONS, fuzz_check_corrections_json);
}

static void test_fuzz_regressions_beam_json(void **state)
{
    (void)state;
    replay(FUZZ_BEAM, fuzz_check_beam_json);
}

static void test_fuzz_regressions_dicom_json(void **state)
{
    (void)state;
    replay(FUZZ_DICOM, fuzz_check_dicom_json);
}

static void test_fuzz_regressions_dicom_part10(void **state)
{
    (void)state;
    replay(FUZZ_DICOM_PART10, fuzz_check_dicom_part10);
}

/* The checks can fail: a parse of a valid file succeeds and a file cut in
 * the middle is refused with a message, through the same check functions. */
static void test_fuzz_regressions_checks_see_both_outcomes(void **state)
{
    static const char good[] = "{\"format\":\"fxledger-readings\",\"version\":1,\"patient\":\"P-1\","
                               "\"readings\":[{\"field\":\"AP\",\"detector\":\"D-1\",\"reading\":1.5}]}";
    fxl_readings_file f = FXL_READINGS_FILE_INIT;
    fxl_ctx *ctx = fuzz_ctx();

    (void)state;
    assert_non_null(ctx);
    assert_int_equal(fxl_readings_parse(ctx, &f, "good.json", good, strlen(good)), 0);
    assert_int_equal((int)f.n, 1);
    fxl_readings_file_release(&f);
    assert_null(fuzz_check_readings_json((const uint8_t *)good, strlen(good)));
    /* Cut after the patient: refused, with the position, no fault. */
    assert_int_equal(fxl_readings_parse(ctx, &f, "cut.json", good, 60), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(ctx), "ends too early"));
    fxl_readings_file_release(&f);
    assert_null(fuzz_check_readings_json((const uint8_t *)good, 60));
}

/* The first finding (docs/robustness.md): a syntax error within the last 12
 * bytes of an input that is not NUL-terminated quoted bytes past its end.
 * The snippet now stops at the end of the input. */
static void test_fuzz_regressions_snippet_stays_inside_input(void **state)
{
    fxl_readings_file f = FXL_READINGS_FILE_INIT;
    fxl_ctx *ctx = fuzz_ctx();
    char text[4] = {']', '[', 'X', 'Y'};  /* parsed as the first 2 bytes only */

    (void)state;
    assert_int_equal(fxl_readings_parse(ctx, &f, "r.json", text, 2), FXL_EINVAL);
    assert_null(strstr(fxl_errmsg(ctx), "XY"));
    fxl_readings_file_release(&f);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fuzz_regressions_plan_json),
        cmocka_unit_test(test_fuzz_regressions_readings_json),
        cmocka_unit_test(test_fuzz_regressions_corrections_json),
        cmocka_unit_test(test_fuzz_regressions_beam_json),
        cmocka_unit_test(test_fuzz_regressions_dicom_json),
        cmocka_unit_test(test_fuzz_regressions_dicom_part10),
        cmocka_unit_test(test_fuzz_regressions_checks_see_both_outcomes),
        cmocka_unit_test(test_fuzz_regressions_snippet_stays_inside_input),
    };
    int rc = cmocka_run_group_tests(tests, NULL, NULL);

    fxl_close(fuzz_ctx());
    return rc;
}

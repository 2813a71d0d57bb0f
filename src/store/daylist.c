/* The day list: who is expected on the treatment units on one local date,
 * exported by the record-and-verify system as a small CSV or JSON file
 * (docs/format-daylist.md). Parsed and validated whole, then stored as one
 * import in one transaction; the worklist follows its order. */
#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "fxl/worklist.h"
#include "store/audit.h"
#include "store/stmt.h"
#include "store/zone.h"

#define DAYLIST_LINES_MAX 500
#define DAYLIST_BYTES_MAX (1024 * 1024)

typedef struct dl_raw {
    char time[40];
    char mrn[65];
    char plan[65];
    int line;                       /* in the file, for messages */
} dl_raw;

static int text_ok(const char *v, size_t max)
{
    size_t len = strlen(v);
    const unsigned char *c;

    if (len < 1 || len > max || v[0] == ' ' || v[len - 1] == ' ')
        return 0;
    for (c = (const unsigned char *)v; *c; c++)
        if (*c < 0x20 || *c == 0x7f)
            return 0;
    return 1;
}

static void trim(char *s)
{
    size_t len = strlen(s), k;

    while (len && (s[len - 1] == ' ' || s[len - 1] == '\t' || s[len - 1] == '\r'))
        s[--len] = '\0';
    k = strspn(s, " \t");
    memmove(s, s + k, len - k + 1);
    len = strlen(s);
    if (len >= 2 && s[0] == '"' && s[len - 1] == '"') {
        memmove(s, s + 1, len - 2);
        s[len - 2] = '\0';
    }
}

static int put(fxl_ctx *ctx, char *dst, size_t size, const char *src, const char *what, int line)
{
    if (strlen(src) >= size)
        return fxl_fail(ctx, FXL_EINVAL, "day list line %d: %s '%.40s...' is longer than %zu characters",
                        line, what, src, size - 1);
    snprintf(dst, size, "%s", src);
    return 0;
}

static int parse_csv(fxl_ctx *ctx, dl_raw *rows, size_t *n, const char *text, size_t len)
{
    char line[512];
    size_t pos = 0;
    int lineno = 0, header = 0, col_time = -1, col_mrn = -1, col_plan = -1, rc;

    *n = 0;
    while (pos < len) {
        size_t end = pos, l;
        char *cells[8], *p;
        int nc = 0, i;

        while (end < len && text[end] != '\n')
            end++;
        l = end - pos;
        lineno++;
        if (l >= sizeof line)
            return fxl_fail(ctx, FXL_EINVAL, "day list line %d is longer than %zu characters", lineno,
                            sizeof line - 1);
        memcpy(line, text + pos, l);
        line[l] = '\0';
        pos = end + 1;
        trim(line);
        if (!line[0] || line[0] == '#')
            continue;
        for (p = line; nc < 8;) {
            char *comma = strchr(p, ',');
            cells[nc++] = p;
            if (!comma)
                break;
            *comma = '\0';
            p = comma + 1;
        }
        for (i = 0; i < nc; i++)
            trim(cells[i]);
        if (!header) {
            for (i = 0; i < nc; i++) {
                if (strcmp(cells[i], "time") == 0) col_time = i;
                else if (strcmp(cells[i], "mrn") == 0) col_mrn = i;
                else if (strcmp(cells[i], "plan") == 0) col_plan = i;
                else
                    return fxl_fail(ctx, FXL_EINVAL,
                                    "day list line %d: unknown column '%s' (the header is "
                                    "time,mrn,plan; see docs/format-daylist.md)", lineno, cells[i]);
            }
            if (col_mrn < 0)
                return fxl_fail(ctx, FXL_EINVAL,
                                "day list line %d: the header must name the columns time,mrn,plan "
                                "(mrn is required)", lineno);
            header = 1;
            continue;
        }
        if (*n >= DAYLIST_LINES_MAX)
            return fxl_fail(ctx, FXL_EINVAL, "day list has more than %d lines", DAYLIST_LINES_MAX);
        memset(&rows[*n], 0, sizeof rows[*n]);
        rows[*n].line = lineno;
        if (col_mrn >= nc)
            return fxl_fail(ctx, FXL_EINVAL, "day list line %d: no MRN", lineno);
        if ((rc = put(ctx, rows[*n].mrn, sizeof rows[*n].mrn, cells[col_mrn], "MRN", lineno)) != 0 ||
            (col_time >= 0 && col_time < nc &&
             (rc = put(ctx, rows[*n].time, sizeof rows[*n].time, cells[col_time], "time", lineno)) != 0) ||
            (col_plan >= 0 && col_plan < nc &&
             (rc = put(ctx, rows[*n].plan, sizeof rows[*n].plan, cells[col_plan], "plan", lineno)) != 0))
            return rc;
        (*n)++;
    }
    if (!header)
        return fxl_fail(ctx, FXL_EINVAL, "day list is empty: expected the header time,mrn,plan");
    return 0;
}

static int json_text(fxl_ctx *ctx, char *dst, size_t size, const cJSON *o, const char *key, int idx,
                     int required)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);

    dst[0] = '\0';
    if (!v || cJSON_IsNull(v)) {
        if (required)
            return fxl_fail(ctx, FXL_EINVAL, "day list entry %d: '%s' is required", idx, key);
        return 0;
    }
    if (!cJSON_IsString(v))
        return fxl_fail(ctx, FXL_EINVAL, "day list entry %d: '%s' must be a string", idx, key);
    if (strlen(v->valuestring) >= size)
        return fxl_fail(ctx, FXL_EINVAL, "day list entry %d: '%s' is longer than %zu characters", idx,
                        key, size - 1);
    snprintf(dst, size, "%s", v->valuestring);
    return 0;
}

/* 1 when a later member of the same object repeats k's key: cJSON keeps
 * both and a lookup takes the first, so a repeated key is refused as in the
 * other JSON readers (the objects here have at most three known keys). */
static int repeated_key(const cJSON *k)
{
    const cJSON *b;

    for (b = k->next; b; b = b->next)
        if (strcmp(k->string, b->string) == 0)
            return 1;
    return 0;
}

static int parse_json(fxl_ctx *ctx, dl_raw *rows, size_t *n, char date[11], const char *text,
                      size_t len)
{
    cJSON *root = cJSON_ParseWithLength(text, len), *list, *e, *k;
    int rc = 0, idx = 0;

    *n = 0;
    if (!root) {
        rc = fxl_fail(ctx, FXL_EINVAL, "day list is not valid JSON (see docs/format-daylist.md)");
        goto cleanup;
    }
    if (!cJSON_IsObject(root)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "day list must be a JSON object with 'appointments'");
        goto cleanup;
    }
    cJSON_ArrayForEach(k, root) {
        if (strcmp(k->string, "date") != 0 && strcmp(k->string, "appointments") != 0 &&
            strcmp(k->string, "format") != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list: unknown key '%s' (date, appointments)", k->string);
            goto cleanup;
        }
        if (repeated_key(k)) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list: key '%s' appears twice", k->string);
            goto cleanup;
        }
    }
    if ((rc = json_text(ctx, date, 11, root, "date", 0, 0)) != 0)
        goto cleanup;
    list = cJSON_GetObjectItemCaseSensitive(root, "appointments");
    if (!cJSON_IsArray(list)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "day list: 'appointments' must be an array");
        goto cleanup;
    }
    cJSON_ArrayForEach(e, list) {
        idx++;
        if (*n >= DAYLIST_LINES_MAX) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list has more than %d entries", DAYLIST_LINES_MAX);
            goto cleanup;
        }
        if (!cJSON_IsObject(e)) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list entry %d must be an object", idx);
            goto cleanup;
        }
        cJSON_ArrayForEach(k, e) {
            if (strcmp(k->string, "time") != 0 && strcmp(k->string, "mrn") != 0 &&
                strcmp(k->string, "plan") != 0) {
                rc = fxl_fail(ctx, FXL_EINVAL, "day list entry %d: unknown key '%s' (time, mrn, plan)",
                              idx, k->string);
                goto cleanup;
            }
            if (repeated_key(k)) {
                rc = fxl_fail(ctx, FXL_EINVAL, "day list entry %d: key '%s' appears twice", idx, k->string);
                goto cleanup;
            }
        }
        memset(&rows[*n], 0, sizeof rows[*n]);
        rows[*n].line = idx;
        if ((rc = json_text(ctx, rows[*n].mrn, sizeof rows[*n].mrn, e, "mrn", idx, 1)) != 0 ||
            (rc = json_text(ctx, rows[*n].time, sizeof rows[*n].time, e, "time", idx, 0)) != 0 ||
            (rc = json_text(ctx, rows[*n].plan, sizeof rows[*n].plan, e, "plan", idx, 0)) != 0)
            goto cleanup;
        (*n)++;
    }
cleanup:
    cJSON_Delete(root);
    return rc;
}

int fxl_daylist_import_text(fxl_ctx *ctx, fxl_daylist_result *out, const char *text, size_t len,
                            const char *at_in)
{
    fxl_stmt s = FXL_STMT_INIT;
    fxl_zone z;
    dl_raw *rows = NULL;
    fxl_daylist_line *lines = NULL;
    cJSON *audit = NULL;
    char now[FXL_TIME_LEN], at[FXL_TIME_LEN], day[11] = "", file_date[11] = "", why[160];
    size_t n = 0, i, k;
    int rc, zoned = 0, in_tx = 0;
    int64_t import_id = 0;

    memset(out, 0, sizeof *out);
    if ((rc = fxl_require_role(ctx, FXL_ROLES_CLINICAL, "importing a day list")) != 0)
        return rc;
    if (!text)
        return fxl_fail(ctx, FXL_EINVAL, "no day list given");
    if (len > DAYLIST_BYTES_MAX)
        return fxl_fail(ctx, FXL_EINVAL, "day list is larger than %d bytes", DAYLIST_BYTES_MAX);
    rows = calloc(DAYLIST_LINES_MAX, sizeof *rows);
    lines = calloc(DAYLIST_LINES_MAX, sizeof *lines);
    if (!rows || !lines) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading a day list");
        goto cleanup;
    }
    for (i = 0; i < len && isspace((unsigned char)text[i]); i++)
        ;
    if (i < len && (text[i] == '{' || text[i] == '['))
        rc = parse_json(ctx, rows, &n, file_date, text, len);
    else
        rc = parse_csv(ctx, rows, &n, text, len);
    if (rc != 0)
        goto cleanup;

    fxl_now(ctx, now);
    if (at_in) {
        if (fxl_time_normalize(at, at_in, 0) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "time '%s' is not in the stored form", at_in);
            goto cleanup;
        }
    } else {
        memcpy(at, now, sizeof at);
    }
    if ((rc = fxl_zone_enter(ctx, &z)) != 0)
        goto cleanup;
    zoned = 1;
    if (file_date[0]) {
        char from[FXL_TIME_LEN], to[FXL_TIME_LEN];
        if (fxl_zone_day_bounds(from, to, file_date) != 0) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list date '%s' must be YYYY-MM-DD", file_date);
            goto cleanup;
        }
        snprintf(day, sizeof day, "%s", file_date);
    } else {
        /* the first full date in the list, else the given or today's date */
        for (i = 0; i < n && !day[0]; i++)
            if (strlen(rows[i].time) > 5) {
                char t[FXL_TIME_LEN];
                if (fxl_zone_parse(t, rows[i].time, NULL, why, sizeof why) == 0)
                    fxl_zone_local_date(day, t);
            }
        if (!day[0])
            fxl_zone_local_date(day, at);
    }
    for (i = 0; i < n; i++) {
        fxl_daylist_line *l = &lines[i];
        if (!text_ok(rows[i].mrn, 64)) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list line %d: MRN '%s' must be 1 to 64 printable "
                          "characters", rows[i].line, rows[i].mrn);
            goto cleanup;
        }
        if (rows[i].plan[0] && !text_ok(rows[i].plan, 64)) {
            rc = fxl_fail(ctx, FXL_EINVAL, "day list line %d: plan '%s' must be 1 to 64 printable "
                          "characters", rows[i].line, rows[i].plan);
            goto cleanup;
        }
        snprintf(l->mrn, sizeof l->mrn, "%s", rows[i].mrn);
        snprintf(l->plan, sizeof l->plan, "%s", rows[i].plan);
        if (rows[i].time[0]) {
            char d[11];
            if (fxl_zone_parse(l->time, rows[i].time, day, why, sizeof why) != 0) {
                rc = fxl_fail(ctx, FXL_EINVAL,
                              "day list line %d: time '%s' is not valid (%s): use HH:MM local, "
                              "YYYY-MM-DDTHH:MM local or ISO 8601 with an offset",
                              rows[i].line, rows[i].time, why);
                goto cleanup;
            }
            fxl_zone_local_date(d, l->time);
            if (strcmp(d, day) != 0) {
                rc = fxl_fail(ctx, FXL_EINVAL,
                              "day list line %d: time '%s' falls on %s, not on the list's day %s",
                              rows[i].line, rows[i].time, d, day);
                goto cleanup;
            }
        }
        for (k = 0; k < i; k++)
            if (strcmp(lines[k].mrn, l->mrn) == 0 && strcmp(lines[k].plan, l->plan) == 0) {
                rc = fxl_fail(ctx, FXL_EINVAL, "day list line %d: patient '%s' is listed twice",
                              rows[i].line, l->mrn);
                goto cleanup;
            }
    }
    fxl_zone_leave(&z);
    zoned = 0;

    if ((rc = fxl_begin(ctx)) != 0)
        goto cleanup;
    in_tx = 1;
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "INSERT INTO daylist_imports (day, lines, user_id, created_at) "
            "VALUES (:day, :lines, :user, :now)")) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":day", day);
    fxl_stmt_bind_int(&s, ":lines", (int64_t)n);
    fxl_stmt_bind_int(&s, ":user", fxl_user_id(ctx));
    fxl_stmt_bind_text(&s, ":now", now);
    if ((rc = fxl_stmt_exec(&s)) != 0)
        goto cleanup;
    import_id = sqlite3_last_insert_rowid(ctx->db);
    fxl_stmt_finalize(&s);
    if ((rc = fxl_stmt_prepare(&s, ctx,
            "INSERT INTO daylist_lines (import_id, position, scheduled_at, mrn, plan_label) "
            "VALUES (:import, :pos, :at, :mrn, :plan)")) != 0)
        goto cleanup;
    for (i = 0; i < n; i++) {
        fxl_stmt_reset(&s);
        fxl_stmt_bind_int(&s, ":import", import_id);
        fxl_stmt_bind_int(&s, ":pos", (int64_t)i + 1);
        if (lines[i].time[0])
            fxl_stmt_bind_text(&s, ":at", lines[i].time);
        else
            fxl_stmt_bind_null(&s, ":at");
        fxl_stmt_bind_text(&s, ":mrn", lines[i].mrn);
        if (lines[i].plan[0])
            fxl_stmt_bind_text(&s, ":plan", lines[i].plan);
        else
            fxl_stmt_bind_null(&s, ":plan");
        if ((rc = fxl_stmt_exec(&s)) != 0)
            goto cleanup;
    }
    fxl_stmt_finalize(&s);
    audit = cJSON_CreateObject();
    cJSON_AddStringToObject(audit, "day", day);
    cJSON_AddNumberToObject(audit, "lines", (double)n);
    if ((rc = fxl_audit_append(ctx, "import", "daylist_imports", import_id, audit)) != 0 ||
        (rc = fxl_commit(ctx)) != 0)
        goto cleanup;
    in_tx = 0;
    snprintf(out->date, sizeof out->date, "%s", day);
    out->n_lines = n;
    out->import_id = import_id;
    {
        /* lines naming no active course today, from the worklist itself */
        fxl_worklist w = FXL_WORKLIST_INIT;
        char from[FXL_TIME_LEN], to[FXL_TIME_LEN];
        fxl_zone z2;
        if (fxl_zone_enter(ctx, &z2) == 0) {
            if (fxl_zone_day_bounds(from, to, day) == 0 && fxl_worklist_build(ctx, &w, from) == 0)
                out->n_unmatched = w.n_unmatched;
            fxl_zone_leave(&z2);
        }
        fxl_worklist_release(&w);
    }
cleanup:
    fxl_stmt_finalize(&s);
    if (in_tx)
        fxl_rollback(ctx);
    if (zoned)
        fxl_zone_leave(&z);
    cJSON_Delete(audit);
    free(rows);
    free(lines);
    return rc;
}

int fxl_daylist_import_file(fxl_ctx *ctx, fxl_daylist_result *out, const char *path,
                            const char *at)
{
    FILE *f = NULL;
    char *buf = NULL;
    size_t len = 0, got;
    int rc;

    memset(out, 0, sizeof *out);
    if (!path || !*path)
        return fxl_fail(ctx, FXL_EINVAL, "no day list file given");
    f = strcmp(path, "-") == 0 ? stdin : fopen(path, "rb");
    if (!f)
        return fxl_fail(ctx, errno == ENOENT || errno == ENOTDIR ? FXL_ENOTFOUND : FXL_EINVAL,
                        "cannot open day list '%s': %s",
                        path, strerror(errno));
    if (!(buf = malloc(DAYLIST_BYTES_MAX + 1))) {
        rc = fxl_fail(ctx, FXL_EIO, "out of memory reading a day list");
        goto cleanup;
    }
    while ((got = fread(buf + len, 1, DAYLIST_BYTES_MAX + 1 - len, f)) > 0) {
        len += got;
        if (len > DAYLIST_BYTES_MAX)
            break;
    }
    if (ferror(f)) {
        rc = fxl_fail(ctx, FXL_EINVAL, "cannot read day list '%s': %s", path, strerror(errno));
        goto cleanup;
    }
    buf[len] = '\0';
    rc = fxl_daylist_import_text(ctx, out, buf, len, at);
cleanup:
    if (f && f != stdin)
        fclose(f);
    free(buf);
    return rc;
}

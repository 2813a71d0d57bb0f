/* fxledger audit: read the hash-chained audit trail, filtered by user,
 * action, entity and period, as a table or JSON; show one row in full.
 * docs/audit.md. Reads the database only; any role, the auditor included. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/json_put.h"
#include "fxl/audit.h"
#include "fxl/report.h"

typedef struct alist {
    cli_env *env;
    cJSON *arr;
    long n;
} alist;

static cJSON *row_json(const fxl_audit_row *r)
{
    cJSON *o = cJSON_CreateObject(), *content = cJSON_Parse(r->content);

    cli_json_put_id(o, "id", r->id);
    cJSON_AddStringToObject(o, "at", r->at);
    cJSON_AddStringToObject(o, "user", r->user);
    cli_json_put_text(o, "user_name", r->user_name);
    cJSON_AddStringToObject(o, "action", r->action);
    cJSON_AddStringToObject(o, "entity", r->entity);
    cli_json_put_id(o, "entity_id", r->entity_id);
    /* the content as stored (the hashed text) and, for reading, parsed */
    cJSON_AddStringToObject(o, "content_text", r->content);
    cJSON_AddItemToObject(o, "content", content ? content : cJSON_CreateNull());
    cJSON_AddStringToObject(o, "prev_hash", r->prev_hash);
    cJSON_AddStringToObject(o, "hash", r->hash);
    return o;
}

/* One line of content: the JSON text cut to `width` bytes at a character
 * boundary, with "..." when cut. n must exceed width + 3. */
static void content_line(char *out, size_t n, const char *content, size_t width)
{
    size_t len = strlen(content), k, i;

    k = len < width ? len : width;
    if (k >= n - 4)
        k = n - 4;
    while (k > 0 && k < len && ((unsigned char)content[k] & 0xC0) == 0x80)
        k--;   /* do not cut inside a UTF-8 sequence */
    for (i = 0; i < k; i++)
        out[i] = content[i] == '\n' || content[i] == '\t' ? ' ' : content[i];
    out[k] = '\0';
    if (k < len)
        strcat(out, "...");
}

static int on_list(void *arg, const fxl_audit_row *r)
{
    alist *l = arg;
    char what[96], line[160];

    l->n++;
    if (l->arr) {
        cJSON_AddItemToArray(l->arr, row_json(r));
        return 0;
    }
    if (r->entity_id)
        snprintf(what, sizeof what, "%s #%lld", r->entity, (long long)r->entity_id);
    else
        snprintf(what, sizeof what, "%s", r->entity);
    content_line(line, sizeof line, r->content, 70);
    printf("%6lld  %s  %-12s %-12s %-24s %s\n", (long long)r->id, r->at, r->user, r->action, what,
           line);
    return 0;
}

static int sub_list(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"who", "LOGIN", "only rows written by this user (login)", NULL},
        {"action", "ACTION", "only this action (record, amend, close, set, ...)", NULL},
        {"entity", "TABLE", "only rows about this table (measurements, review_events, ...)", NULL},
        {"id", "N", "only rows about the entity with this id", NULL},
        {"month", "YYYY-MM", "only rows written in this month (department time zone)", NULL},
        {"from", "YYYY-MM-DD", "only rows written from this local day (with --to)", NULL},
        {"to", "YYYY-MM-DD", "... to this local day, inclusive", NULL},
        {"limit", "N", "only the last N matching rows", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_audit_filter f = FXL_AUDIT_FILTER_INIT;
    fxl_report_period per;
    alist l = {0};
    long v;
    int npos, rc;

    rc = cli_parse(env, "audit list [--who LOGIN] [--action A] [--entity TABLE] [--id N] "
                        "[--month YYYY-MM | --from DAY --to DAY] [--limit N]",
                   "Lists rows of the audit trail in the order of the chain: id, time (UTC),\n"
                   "user, action, what it is about and the start of its content. 'fxledger\n"
                   "audit show ID' prints a row in full; 'fxledger verify' checks the chain.",
                   opts, argc, argv, NULL, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    f.user = cli_get(opts, "who");
    f.action = cli_get(opts, "action");
    f.entity = cli_get(opts, "entity");
    if (cli_get(opts, "id")) {
        if (cli_int(&v, cli_get(opts, "id"), "entity id", 1, 9000000000000000000L) != 0)
            return CLI_EXIT_DATA;
        f.entity_id = v;
    }
    if (cli_get(opts, "limit")) {
        if (cli_int(&v, cli_get(opts, "limit"), "limit", 1, 100000000L) != 0)
            return CLI_EXIT_DATA;
        f.limit = v;
    }
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "reading the audit trail")) != 0)
        return cli_fail(env, rc);
    if (cli_get(opts, "month") || cli_get(opts, "from") || cli_get(opts, "to")) {
        if ((rc = fxl_report_period_resolve(env->ctx, &per, cli_get(opts, "month"),
                                            cli_get(opts, "from"), cli_get(opts, "to"))) != 0)
            return cli_fail(env, rc);
        f.from = per.from;
        f.to = per.to;
    }
    l.env = env;
    if (env->json)
        l.arr = cJSON_CreateArray();
    else
        printf("%6s  %-20s  %-12s %-12s %-24s %s\n", "id", "at (UTC)", "user", "action", "about",
               "content");
    rc = fxl_audit_list(env->ctx, &f, on_list, &l);
    if (rc != 0) {
        cJSON_Delete(l.arr);
        return cli_fail(env, rc);
    }
    if (env->json)
        return cli_print_json(l.arr);
    printf("%ld row%s\n", l.n, l.n == 1 ? "" : "s");
    return CLI_EXIT_OK;
}

static int on_show(void *arg, const fxl_audit_row *r)
{
    cli_env *env = arg;
    cJSON *content;
    char *pretty = NULL;

    if (env->json)
        return cli_print_json(row_json(r)) == 0 ? 0 : -1;
    content = cJSON_Parse(r->content);
    if (content)
        pretty = cJSON_Print(content);
    printf("audit row %lld\n", (long long)r->id);
    printf("  at:        %s (UTC)\n", r->at);
    printf("  user:      %s%s%s%s\n", r->user, r->user_name[0] ? " (" : "", r->user_name,
           r->user_name[0] ? ")" : "");
    printf("  action:    %s\n", r->action);
    if (r->entity_id)
        printf("  about:     %s #%lld\n", r->entity, (long long)r->entity_id);
    else
        printf("  about:     %s\n", r->entity);
    printf("  prev hash: %s\n  hash:      %s\n", r->prev_hash, r->hash);
    printf("  content (as hashed):\n    %s\n", r->content);
    if (pretty)
        printf("  content (formatted):\n%s\n", pretty);
    cJSON_free(pretty);
    cJSON_Delete(content);
    return 0;
}

static int sub_show(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{NULL, NULL, NULL, NULL}};
    const char *pos[1];
    long id;
    int npos, rc;

    rc = cli_parse(env, "audit show ID", "Prints one audit row in full: time, user and full name,\n"
                   "action, what it is about, both hashes and the content as hashed.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("audit row id is required: fxledger audit show ID");
        return CLI_EXIT_USAGE;
    }
    if (cli_int(&id, pos[0], "audit row id", 1, 9000000000000000000L) != 0)
        return CLI_EXIT_DATA;
    if ((rc = fxl_require_role(env->ctx, FXL_ROLES_ANY, "reading the audit trail")) != 0)
        return cli_fail(env, rc);
    rc = fxl_audit_get(env->ctx, id, on_show, env);
    return rc ? cli_fail(env, rc) : CLI_EXIT_OK;
}

int cmd_audit(cli_env *env, int argc, char **argv)
{
    static const cli_sub subs[] = {
        {"list", sub_list, "list audit rows, filtered by user, action, entity and period"},
        {"show", sub_show, "print one audit row in full"},
        {NULL, NULL, NULL}};

    return cli_dispatch_sub(env, subs, "Reads the audit trail. Any role may read it; it never "
                            "changes the database.", argc, argv);
}

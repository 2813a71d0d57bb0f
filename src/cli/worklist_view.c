/* The worklist and a patient's open items as the therapist reads them at an
 * 80-column console: one block per patient, holds on top in words that say
 * what is open and who clears it. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli/table.h"
#include "cli/worklist_view.h"
#include "fxl/fraction.h"
#include "fxl/rules.h"

void cli_local_hhmm(const cli_env *env, char out[16], const char *stored)
{
    char full[40];

    out[0] = '\0';
    if (!stored || !*stored)
        return;
    fxl_time_show_local(env->ctx, full, sizeof full, stored);
    /* "2026-11-02 10:00 +01:00" */
    snprintf(out, 16, "%.5s", strlen(full) >= 16 ? full + 11 : full);
}

void cli_items_print(const cli_env *env, FILE *out, const fxl_worklist_item *items, size_t n,
                     int indent)
{
    size_t i;
    char first[96], text[1400];

    for (i = 0; i < n; i++) {
        const fxl_worklist_item *it = &items[i];
        if (it->is_hold) {
            snprintf(first, sizeof first, "%*s%sHOLD%s #%lld: ", indent, "", cli_color(env, CLI_RED),
                     cli_color(env, CLI_RESET), (long long)it->id);
            snprintf(text, sizeof text, "%s. Do not treat until a physicist has investigated and "
                     "closed item #%lld.", it->summary, (long long)it->id);
        } else {
            snprintf(first, sizeof first, "%*sitem #%lld (%s%s): ", indent, "", (long long)it->id,
                     fxl_severity_name(it->severity), it->on_detector ? ", detector" : "");
            snprintf(text, sizeof text, "%s", it->summary);
        }
        /* colour codes take no room on screen: wrap on the visible width */
        if (env->color && it->is_hold) {
            char plain[96];
            snprintf(plain, sizeof plain, "%*sHOLD #%lld: ", indent, "", (long long)it->id);
            fputs(cli_color(env, CLI_RED), out);
            cli_wrap_hang(out, plain, indent + 2, text, CLI_WIDTH);
            fputs(cli_color(env, CLI_RESET), out);
        } else {
            cli_wrap_hang(out, first, indent + 2, text, CLI_WIDTH);
        }
    }
}

static void print_entry(const cli_env *env, const fxl_worklist_entry *e)
{
    char hhmm[16], first[64], line[800];
    cli_table t;
    size_t i, shown = 0;
    static const char *const head[] = {"field", "point", "detector", "due", NULL};

    cli_local_hhmm(env, hhmm, e->scheduled_at);
    snprintf(first, sizeof first, "%2d  %-5s  ", e->line, hhmm[0] ? hhmm : "--:--");
    snprintf(line, sizeof line, "%s  %s%s", e->mrn, e->patient_name,
             e->n_holds ? "  - ON HOLD" : "");
    cli_wrap(stdout, first, line, CLI_WIDTH);
    if (e->treated_today && !e->open_fraction_id)
        snprintf(line, sizeof line, "plan '%s' (%s, %s): fraction %d of %d treated today", e->plan,
                 e->site, e->technique, e->next_fraction - 1, e->fractions);
    else
        snprintf(line, sizeof line, "plan '%s' (%s, %s): fraction %d of %d%s, %zu field%s due",
                 e->plan, e->site, e->technique, e->next_fraction, e->fractions,
                 e->open_fraction_id ? " (begun: resume)" : "", e->n_due, e->n_due == 1 ? "" : "s");
    cli_wrap(stdout, "           ", line, CLI_WIDTH);
    cli_items_print(env, stdout, e->items, e->n_items, 11);
    cli_table_init(&t, head);
    for (i = 0; i < e->n_fields; i++) {
        const fxl_worklist_field *f = &e->fields[i];
        char det[80], due[48];
        const char *cells[4];
        if (f->due_reason == FXL_DUE_NOT)
            continue;
        snprintf(det, sizeof det, "%s%s", f->detector[0] ? f->detector : "(choose)",
                 f->detector_ok ? "" : " (!)");
        snprintf(due, sizeof due, "%s%s", fxl_due_reason_text(f->due_reason),
                 f->measured ? ", measured" : "");
        cells[0] = f->name;
        cells[1] = f->point;
        cells[2] = det;
        cells[3] = due;
        cli_table_add(&t, cells);
        shown++;
    }
    if (shown)
        cli_table_print(stdout, &t, CLI_WIDTH, 11);
    cli_table_release(&t);
    for (i = 0; i < e->n_warnings; i++)
        cli_wrap(stdout, "           (!) ", e->warnings[i], CLI_WIDTH);
}

void cli_worklist_print(const cli_env *env, const fxl_worklist *w)
{
    char when[40], head[200];
    size_t i, holds = 0;

    for (i = 0; i < w->n; i++)
        if (w->entries[i].n_holds)
            holds++;
    if (w->daylist_imported_at[0]) {
        fxl_time_show_local(env->ctx, when, sizeof when, w->daylist_imported_at);
        snprintf(head, sizeof head, "Worklist for %s (%s), day list imported %s", w->date,
                 w->timezone, when);
    } else {
        snprintf(head, sizeof head, "Worklist for %s (%s), no day list imported: patients by MRN",
                 w->date, w->timezone);
    }
    printf("%s", cli_color(env, CLI_BOLD));
    cli_wrap(stdout, "", head, CLI_WIDTH);
    printf("%s", cli_color(env, CLI_RESET));
    printf("%zu patient%s under treatment", w->n, w->n == 1 ? "" : "s");
    if (holds)
        printf(", %zu on hold", holds);
    printf(".\n");
    for (i = 0; i < w->n; i++) {
        printf("\n");
        print_entry(env, &w->entries[i]);
    }
    for (i = 0; i < w->n_unmatched; i++) {
        if (i == 0)
            printf("\n");
        cli_wrap(stdout, "(!) ", w->unmatched[i], CLI_WIDTH);
    }
    if (w->n)
        printf("\nLog a fraction: fxledger record (then the line number).\n");
}

/* fxledger serve: the department's web console on this database (src/web,
 * docs/console.md). The server process owns the database; browsers at the
 * workstations log in with the same accounts as the command line. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "fxl/module.h"
#include "web/serve.h"

/* ADDR:PORT, [v6addr]:PORT, or :PORT / PORT alone (loopback). */
static int parse_listen(char *addr, size_t size, unsigned *port, const char *text)
{
    const char *colon = strrchr(text, ':');
    long p;
    char *end;

    if (text[0] == '[') {
        const char *close = strchr(text, ']');
        if (!close || close[1] != ':' || (size_t)(close - text) >= size)
            return -1;
        snprintf(addr, size, "%.*s", (int)(close - text - 1), text + 1);
        colon = close + 1;
    } else if (!colon) {
        snprintf(addr, size, "127.0.0.1");
        colon = text - 1;
    } else {
        if ((size_t)(colon - text) >= size)
            return -1;
        snprintf(addr, size, "%.*s", (int)(colon - text), text);
        if (!addr[0])
            snprintf(addr, size, "127.0.0.1");
    }
    p = strtol(colon + 1, &end, 10);
    if (end == colon + 1 || *end || p < 0 || p > 65535)
        return -1;
    *port = (unsigned)p;
    return 0;
}

int cmd_serve(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {{"listen", "ADDR:PORT", "address and port to listen on (default 127.0.0.1:8617; port 0 picks one)", NULL},
                      {"tls-cert", "FILE", "PEM certificate: serve HTTPS (with --tls-key)", NULL},
                      {"tls-key", "FILE", "PEM private key of the certificate", NULL},
                      {"behind-tls-proxy", NULL, "a TLS reverse proxy on this host forwards to us: mark cookies Secure, send HSTS", NULL},
                      {"threads", "N", "worker threads, each with its own database connection (default 4)", NULL},
                      {"login-rate", "N", "login attempts per minute per client address (default 10)", NULL},
                      {NULL, NULL, NULL, NULL}};
    web_options o;
    int (*serve)(const web_options *);
    char why[512];
    const char *pos[1];
    char addr[64];
    long n;
    int npos, rc;

    rc = cli_parse(env, "serve [--listen ADDR:PORT] [--tls-cert FILE --tls-key FILE]",
                   "Runs the department's web console on the database until Ctrl-C or SIGTERM.\n"
                   "Browsers log in with the same accounts; docs/console.md describes the pages.\n"
                   "Listen on loopback unless TLS or a reverse proxy protects the traffic.",
                   opts, argc, argv, pos, 0, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    memset(&o, 0, sizeof o);
    o.db_path = env->db_path;
    o.address = "127.0.0.1";
    o.port = WEB_DEFAULT_PORT;
    o.threads = WEB_DEFAULT_THREADS;
    if (cli_get(opts, "listen")) {
        if (parse_listen(addr, sizeof addr, &o.port, cli_get(opts, "listen")) != 0) {
            cli_error("--listen '%s' must be ADDR:PORT, e.g. 127.0.0.1:8617", cli_get(opts, "listen"));
            return CLI_EXIT_USAGE;
        }
        o.address = addr;
    }
    o.tls_cert = cli_get(opts, "tls-cert");
    o.tls_key = cli_get(opts, "tls-key");
    o.behind_tls_proxy = cli_get(opts, "behind-tls-proxy") != NULL;
    if (!o.tls_cert != !o.tls_key) {
        cli_error("--tls-cert and --tls-key go together");
        return CLI_EXIT_USAGE;
    }
    if (cli_get(opts, "threads")) {
        if (cli_int(&n, cli_get(opts, "threads"), "--threads", 1, 64) != 0)
            return CLI_EXIT_USAGE;
        o.threads = (unsigned)n;
    }
    if (cli_get(opts, "login-rate")) {
        if (cli_int(&n, cli_get(opts, "login-rate"), "--login-rate", 1, 1000) != 0)
            return CLI_EXIT_USAGE;
        o.login_rate = (unsigned)n;
    }
    /* The console lives in the module fxledger-web.so (include/fxl/module.h). */
    if ((serve = (int (*)(const web_options *))fxl_module_symbol("web", "web_serve", why, sizeof why)) == NULL) {
        cli_error("serve: %s", why);
        return CLI_EXIT_DATA;
    }
    rc = serve(&o);
    if (rc == FXL_EINVAL)
        return CLI_EXIT_USAGE;
    return rc == 0 ? CLI_EXIT_OK : rc == FXL_EDB ? CLI_EXIT_DB : CLI_EXIT_DATA;
}

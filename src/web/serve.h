/* fxledger serve: the web console's daemon (server.c), started by the
 * command line (src/cli/cmd_serve.c). */
#ifndef FXL_WEB_SERVE_H
#define FXL_WEB_SERVE_H

typedef struct web_options {
    const char *db_path;
    const char *address;     /* "127.0.0.1" */
    unsigned port;           /* 8617 */
    unsigned threads;        /* worker threads, each with its own database connection */
    const char *tls_cert;    /* PEM files, both or neither */
    const char *tls_key;
    int behind_tls_proxy;    /* a TLS reverse proxy on this host: cookies Secure, HSTS */
    int quiet;               /* no start-up line on stderr */
    unsigned login_rate;     /* login attempts per minute per client address; 0: the default */
} web_options;

#define WEB_DEFAULT_PORT 8617
#define WEB_DEFAULT_THREADS 4

/* Runs until SIGINT or SIGTERM. Returns 0, or a negative FXL_E code with a
 * message already printed on stderr. */
int web_serve(const web_options *o);

#endif

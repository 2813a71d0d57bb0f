/* The daemon of fxledger serve: GNU libmicrohttpd (LGPL, linked
 * dynamically) with its own thread pool; each worker thread opens its own
 * SQLite connection on its first request and closes it when the thread
 * ends. A request is read whole (bounded), turned into a web_req, handed to
 * web_dispatch and answered with the security headers every response
 * carries. Decisions: docs/console.md. */
#include <arpa/inet.h>
#include <errno.h>
#include <microhttpd.h>
#include <netinet/in.h>
#include <pthread.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <time.h>

#include "fxl/server.h"
#include "web/assets.h"
#include "web/serve.h"
#include "web/web.h"

/* A form or a JSON body larger than this is refused (413): the largest
 * legitimate one, a fraction's readings or a comment of 2000 characters,
 * is a few kilobytes. */
#define WEB_BODY_MAX (64 * 1024)

static const web_options *g_opts;
static pthread_key_t g_ctx_key;
static unsigned g_login_rate = 10;

struct conn_state {
    char *body;
    size_t len;
    int too_big;
};

static void close_ctx(void *p)
{
    fxl_close(p);
}

/* This worker thread's connection, opened on first use. */
static fxl_ctx *thread_ctx(void)
{
    fxl_ctx *c = pthread_getspecific(g_ctx_key);
    if (c)
        return c;
    if (fxl_open(&c, g_opts->db_path, 0) != 0) {
        fprintf(stderr, "fxledger serve: %s\n", c ? fxl_errmsg(c) : "cannot open the database");
        fxl_close(c);
        return NULL;
    }
    pthread_setspecific(g_ctx_key, c);
    return c;
}

/* ---- login rate limit -------------------------------------------------------- */

/* Login attempts per client address inside a sliding minute, on top of the
 * store's account lockout (which counts per login): an address trying many
 * logins gets 429 before any password is checked. A small table, oldest
 * entry reused. */
#define RATE_SLOTS 256
#define RATE_WINDOW_S 60
static struct {
    char addr[64];
    time_t start;
    unsigned count;
} g_rate[RATE_SLOTS];
static pthread_mutex_t g_rate_lock = PTHREAD_MUTEX_INITIALIZER;

int web_login_rate_ok(const char *addr)
{
    struct timespec ts;
    int i, free_i = -1, ok = 1;
    time_t now, oldest = 0;

    clock_gettime(CLOCK_MONOTONIC, &ts);
    now = ts.tv_sec;
    pthread_mutex_lock(&g_rate_lock);
    for (i = 0; i < RATE_SLOTS; i++) {
        if (g_rate[i].addr[0] && strcmp(g_rate[i].addr, addr) == 0)
            break;
        if (free_i < 0 || g_rate[i].start < oldest) {
            free_i = i;
            oldest = g_rate[i].addr[0] ? g_rate[i].start : 0;
        }
    }
    if (i == RATE_SLOTS) {
        i = free_i;
        snprintf(g_rate[i].addr, sizeof g_rate[i].addr, "%s", addr);
        g_rate[i].start = now;
        g_rate[i].count = 0;
    }
    if (now - g_rate[i].start >= RATE_WINDOW_S) {
        g_rate[i].start = now;
        g_rate[i].count = 0;
    }
    if (g_rate[i].count >= g_login_rate)
        ok = 0;
    else
        g_rate[i].count++;
    pthread_mutex_unlock(&g_rate_lock);
    return ok;
}

/* ---- headers ------------------------------------------------------------------- */

const char *web_header(web_req *r, const char *name)
{
    return r->conn ? MHD_lookup_connection_value(r->conn, MHD_HEADER_KIND, name) : NULL;
}

const char *web_cookie(web_req *r, const char *name)
{
    return r->conn ? MHD_lookup_connection_value(r->conn, MHD_COOKIE_KIND, name) : NULL;
}

/* ---- arguments --------------------------------------------------------------------- */

static void add_field(web_req *r, const char *name, size_t nlen, const char *value, size_t vlen)
{
    web_field *f;
    if (r->n_form >= WEB_FIELDS_MAX)
        return;
    f = &r->form[r->n_form];
    f->name = strndup(name, nlen);
    f->value = strndup(value, vlen);
    if (!f->name || !f->value) {
        free(f->name);
        free(f->value);
        return;
    }
    r->n_form++;
}

static enum MHD_Result add_query(void *cls, enum MHD_ValueKind kind, const char *key,
                                 const char *value)
{
    (void)kind;
    add_field(cls, key, strlen(key), value ? value : "", value ? strlen(value) : 0);
    return MHD_YES;
}

static int hexval(char c)
{
    if (c >= '0' && c <= '9')
        return c - '0';
    if (c >= 'a' && c <= 'f')
        return c - 'a' + 10;
    if (c >= 'A' && c <= 'F')
        return c - 'A' + 10;
    return -1;
}

/* Percent-decodes in place ('+' is a space); returns the new length. */
static size_t url_decode(char *s, size_t len)
{
    size_t i, o = 0;
    for (i = 0; i < len; i++) {
        if (s[i] == '+')
            s[o++] = ' ';
        else if (s[i] == '%' && i + 2 < len + 0 && hexval(s[i + 1]) >= 0 && hexval(s[i + 2]) >= 0) {
            s[o++] = (char)(hexval(s[i + 1]) * 16 + hexval(s[i + 2]));
            i += 2;
        } else
            s[o++] = s[i];
    }
    return o;
}

static void parse_form(web_req *r, char *body, size_t len)
{
    size_t i = 0;
    while (i < len) {
        size_t end = i, eq;
        while (end < len && body[end] != '&')
            end++;
        for (eq = i; eq < end && body[eq] != '='; eq++)
            ;
        if (eq > i) {
            size_t nlen = url_decode(body + i, eq - i);
            size_t vlen = eq < end ? url_decode(body + eq + 1, end - eq - 1) : 0;
            add_field(r, body + i, nlen, eq < end ? body + eq + 1 : "", vlen);
        }
        i = end + 1;
    }
}

const char *web_arg(web_req *r, const char *name)
{
    size_t i;
    for (i = 0; i < r->n_form; i++)
        if (strcmp(r->form[i].name, name) == 0)
            return r->form[i].value;
    return NULL;
}

int64_t web_arg_id(web_req *r, const char *name)
{
    const char *s = web_arg(r, name);
    int64_t v = 0;
    if (!s || !*s || strlen(s) > 15)
        return 0;
    for (; *s; s++) {
        if (*s < '0' || *s > '9')
            return 0;
        v = v * 10 + (*s - '0');
    }
    return v;
}

/* ---- one request ----------------------------------------------------------------------- */

static void client_address(web_req *r, struct MHD_Connection *conn)
{
    const union MHD_ConnectionInfo *ci = MHD_get_connection_info(conn, MHD_CONNECTION_INFO_CLIENT_ADDRESS);
    snprintf(r->client, sizeof r->client, "unknown");
    if (!ci || !ci->client_addr)
        return;
    if (ci->client_addr->sa_family == AF_INET) {
        const struct sockaddr_in *a = (const struct sockaddr_in *)(const void *)ci->client_addr;
        inet_ntop(AF_INET, &a->sin_addr, r->client, sizeof r->client);
    } else if (ci->client_addr->sa_family == AF_INET6) {
        const struct sockaddr_in6 *a = (const struct sockaddr_in6 *)(const void *)ci->client_addr;
        inet_ntop(AF_INET6, &a->sin6_addr, r->client, sizeof r->client);
    }
}

/* Every response: a strict policy with no inline script or style from
 * anywhere but this server, no framing, no referrer, no caching of pages
 * that show patient data. */
static void security_headers(struct MHD_Response *resp, int cacheable)
{
    MHD_add_response_header(resp, "Content-Security-Policy",
                            "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; "
                            "connect-src 'self'; form-action 'self'; frame-ancestors 'none'; "
                            "base-uri 'none'");
    MHD_add_response_header(resp, "X-Content-Type-Options", "nosniff");
    MHD_add_response_header(resp, "X-Frame-Options", "DENY");
    MHD_add_response_header(resp, "Referrer-Policy", "no-referrer");
    MHD_add_response_header(resp, "Cross-Origin-Opener-Policy", "same-origin");
    MHD_add_response_header(resp, "Cache-Control", cacheable ? "private, max-age=600" : "no-store");
    if (g_opts && (g_opts->tls_cert || g_opts->behind_tls_proxy))
        MHD_add_response_header(resp, "Strict-Transport-Security", "max-age=31536000");
}

static enum MHD_Result respond(struct MHD_Connection *conn, web_req *r, int cacheable)
{
    struct MHD_Response *resp;
    enum MHD_Result ret;
    char disp[300];

    if (r->out.failed) {
        web_buf_release(&r->out);
        r->status = 500;
        r->out_type = "text/plain; charset=utf-8";
        web_buf_add(&r->out, "out of memory\n", 14);
    }
    resp = MHD_create_response_from_buffer(r->out.len, r->out.data ? r->out.data : (void *)"",
                                           r->out.data ? MHD_RESPMEM_MUST_FREE : MHD_RESPMEM_PERSISTENT);
    if (!resp)
        return MHD_NO;
    r->out.data = NULL;
    r->out.len = r->out.cap = 0;
    MHD_add_response_header(resp, "Content-Type", r->out_type ? r->out_type : "text/html; charset=utf-8");
    security_headers(resp, cacheable);
    if (r->location[0])
        MHD_add_response_header(resp, "Location", r->location);
    if (r->cookie[0])
        MHD_add_response_header(resp, "Set-Cookie", r->cookie);
    if (r->download_name) {
        snprintf(disp, sizeof disp, "attachment; filename=\"%s\"", r->download_name);
        MHD_add_response_header(resp, "Content-Disposition", disp);
    }
    if (r->status == 503)
        MHD_add_response_header(resp, "Retry-After", "2");
    ret = MHD_queue_response(conn, (unsigned)r->status, resp);
    MHD_destroy_response(resp);
    return ret;
}

static void req_release(web_req *r)
{
    size_t i;
    for (i = 0; i < r->n_form; i++) {
        free(r->form[i].name);
        /* Form values may hold a password: wipe before freeing. */
        memset(r->form[i].value, 0, strlen(r->form[i].value));
        free(r->form[i].value);
    }
    r->n_form = 0;
    cJSON_Delete(r->json);
    r->json = NULL;
    web_buf_release(&r->out);
}

static int serve_asset(web_req *r)
{
    const char *name = r->path + strlen("/assets/");
    int i;
    for (i = 0; i < web_asset_count; i++)
        if (strcmp(web_assets[i].name, name) == 0) {
            web_buf_add(&r->out, web_assets[i].data, web_assets[i].len);
            r->out_type = web_assets[i].type;
            r->status = 200;
            return 1;
        }
    return 0;
}

static enum MHD_Result on_request(void *cls, struct MHD_Connection *conn, const char *url,
                                  const char *method, const char *version, const char *upload_data,
                                  size_t *upload_size, void **con_cls)
{
    struct conn_state *st = *con_cls;
    web_req *r;
    enum MHD_Result ret;
    int cacheable = 0;

    (void)cls;
    (void)version;
    if (!st) {
        if (!(st = calloc(1, sizeof *st)))
            return MHD_NO;
        *con_cls = st;
        return MHD_YES;
    }
    if (*upload_size) {
        if (!st->too_big) {
            if (st->len + *upload_size > WEB_BODY_MAX) {
                st->too_big = 1;
                free(st->body);
                st->body = NULL;
                st->len = 0;
            } else {
                char *nb = realloc(st->body, st->len + *upload_size + 1);
                if (!nb)
                    return MHD_NO;
                memcpy(nb + st->len, upload_data, *upload_size);
                st->body = nb;
                st->len += *upload_size;
                st->body[st->len] = '\0';
            }
        }
        *upload_size = 0;
        return MHD_YES;
    }

    if (!(r = calloc(1, sizeof *r)))
        return MHD_NO;
    r->method = method;
    r->path = url;
    r->conn = conn;
    r->tls = g_opts->tls_cert != NULL || g_opts->behind_tls_proxy;
    r->status = 200;
    client_address(r, conn);
    r->content_type = MHD_lookup_connection_value(conn, MHD_HEADER_KIND, "Content-Type");

    if (st->too_big) {
        web_fail(r, 413, "The request is larger than the console accepts (64 KiB).");
        goto done;
    }
    if (strcmp(method, "GET") != 0 && strcmp(method, "POST") != 0 && strcmp(method, "HEAD") != 0) {
        web_fail(r, 405, "Only GET and POST are served.");
        goto done;
    }
    if (strncmp(url, "/assets/", 8) == 0 && strcmp(method, "POST") != 0) {
        if (serve_asset(r)) {
            cacheable = 1;
            goto done;
        }
        web_fail(r, 404, "No such file.");
        goto done;
    }
    if (strcmp(method, "HEAD") == 0)
        r->method = "GET";
    /* POST bodies: the form first, so a field in the body wins over the query. */
    if (st->body) {
        r->body = st->body;
        r->body_len = st->len;
        if (r->content_type && strncmp(r->content_type, "application/json", 16) == 0)
            r->json = cJSON_ParseWithLength(st->body, st->len);
        else if (r->content_type &&
                 strncmp(r->content_type, "application/x-www-form-urlencoded", 33) == 0) {
            char *copy = malloc(st->len + 1);
            if (copy) {
                memcpy(copy, st->body, st->len + 1);
                parse_form(r, copy, st->len);
                memset(copy, 0, st->len);
                free(copy);
            }
        }
    }
    MHD_get_connection_values(conn, MHD_GET_ARGUMENT_KIND, add_query, r);

    if (!(r->ctx = thread_ctx())) {
        web_fail(r, 503, "The database could not be opened; the console's log says why. Retry later.");
        goto done;
    }
    web_dispatch(r);

done:
    ret = respond(conn, r, cacheable);
    req_release(r);
    free(r);
    return ret;
}

static void on_completed(void *cls, struct MHD_Connection *conn, void **con_cls,
                         enum MHD_RequestTerminationCode toe)
{
    struct conn_state *st = *con_cls;
    (void)cls;
    (void)conn;
    (void)toe;
    if (st) {
        if (st->body) {
            memset(st->body, 0, st->len);
            free(st->body);
        }
        free(st);
        *con_cls = NULL;
    }
}

static char *read_file(const char *path)
{
    FILE *f = fopen(path, "rb");
    char *buf = NULL;
    long n;
    if (!f)
        return NULL;
    if (fseek(f, 0, SEEK_END) == 0 && (n = ftell(f)) > 0 && n < 1024 * 1024 && fseek(f, 0, SEEK_SET) == 0 &&
        (buf = malloc((size_t)n + 1)) != NULL) {
        if (fread(buf, 1, (size_t)n, f) != (size_t)n) {
            free(buf);
            buf = NULL;
        } else
            buf[n] = '\0';
    }
    fclose(f);
    return buf;
}

/* libmicrohttpd's own messages. Before the daemon runs they explain a
 * failed start: kept for the one refusal line web_serve prints. */
static int g_running;
static char g_start_msg[256];

static void log_mhd(void *cls, const char *fmt, va_list ap)
{
    size_t n;

    (void)cls;
    if (!g_running) {
        vsnprintf(g_start_msg, sizeof g_start_msg, fmt, ap);
        n = strlen(g_start_msg);
        while (n > 0 && (g_start_msg[n - 1] == '\n' || g_start_msg[n - 1] == '.'))
            g_start_msg[--n] = '\0';
        return;
    }
    fputs("fxledger serve: ", stderr);
    vfprintf(stderr, fmt, ap);
}

void web_set_login_rate(unsigned per_minute)
{
    g_login_rate = per_minute;
}

int web_serve(const web_options *o)
{
    struct MHD_Daemon *d = NULL;
    struct sockaddr_in sa4;
    struct sockaddr_in6 sa6;
    const struct sockaddr *sa;
    char *cert = NULL, *key = NULL;
    unsigned flags = MHD_USE_INTERNAL_POLLING_THREAD | MHD_USE_ERROR_LOG;
    const union MHD_DaemonInfo *info;
    fxl_ctx *probe = NULL;
    sigset_t set;
    int sig, rc = 0;

    g_opts = o;
    if (o->login_rate)
        web_set_login_rate(o->login_rate);
    /* The store switches TZ to the department's zone under a lock (store/
     * zone.c); an existing TZ entry is replaced in place, never removed, so
     * the environment array is not reallocated under a reading thread. */
    if (!getenv("TZ"))
        setenv("TZ", "UTC0", 1);
    memset(&sa4, 0, sizeof sa4);
    memset(&sa6, 0, sizeof sa6);
    if (inet_pton(AF_INET, o->address, &sa4.sin_addr) == 1) {
        sa4.sin_family = AF_INET;
        sa4.sin_port = htons((uint16_t)o->port);
        sa = (const struct sockaddr *)&sa4;
    } else if (inet_pton(AF_INET6, o->address, &sa6.sin6_addr) == 1) {
        sa6.sin6_family = AF_INET6;
        sa6.sin6_port = htons((uint16_t)o->port);
        sa = (const struct sockaddr *)&sa6;
        flags |= MHD_USE_IPv6;
    } else {
        fprintf(stderr, "fxledger: error: serve: listen address '%s' must be an IPv4 or IPv6 address\n", o->address);
        return FXL_EINVAL;
    }
    /* Open once here so a wrong path or a newer schema stops the start, and
     * pending migrations are applied before any worker opens the file. */
    if (fxl_open(&probe, o->db_path, 0) != 0) {
        fprintf(stderr, "fxledger: error: serve: %s\n", probe ? fxl_errmsg(probe) : "cannot open the database");
        fxl_close(probe);
        return FXL_EDB;
    }
    fxl_close(probe);
    if (o->tls_cert) {
        if (MHD_is_feature_supported(MHD_FEATURE_TLS) != MHD_YES) {
            fprintf(stderr, "fxledger: error: serve: this libmicrohttpd was built without TLS\n");
            return FXL_EINVAL;
        }
        if (!(cert = read_file(o->tls_cert)) || !(key = read_file(o->tls_key))) {
            fprintf(stderr, "fxledger: error: serve: cannot read '%s'\n", cert ? o->tls_key : o->tls_cert);
            rc = FXL_EIO;
            goto cleanup;
        }
        flags |= MHD_USE_TLS;
    }
    if (pthread_key_create(&g_ctx_key, close_ctx) != 0) {
        rc = FXL_EIO;
        goto cleanup;
    }
    /* The workers inherit this mask; the main thread waits for the signal. */
    sigemptyset(&set);
    sigaddset(&set, SIGINT);
    sigaddset(&set, SIGTERM);
    pthread_sigmask(SIG_BLOCK, &set, NULL);
    signal(SIGPIPE, SIG_IGN);

    if (cert)
        d = MHD_start_daemon(flags, 0, NULL, NULL, on_request, NULL, MHD_OPTION_EXTERNAL_LOGGER, log_mhd, NULL,
                             MHD_OPTION_SOCK_ADDR, sa,
                             MHD_OPTION_THREAD_POOL_SIZE, o->threads, MHD_OPTION_CONNECTION_TIMEOUT,
                             (unsigned)30, MHD_OPTION_CONNECTION_LIMIT, (unsigned)256,
                             MHD_OPTION_PER_IP_CONNECTION_LIMIT, (unsigned)64,
                             MHD_OPTION_CONNECTION_MEMORY_LIMIT, (size_t)(128 * 1024),
                             MHD_OPTION_NOTIFY_COMPLETED, on_completed, NULL,
                             MHD_OPTION_HTTPS_MEM_CERT, cert,
                             MHD_OPTION_HTTPS_MEM_KEY, key, MHD_OPTION_END);
    else
        d = MHD_start_daemon(flags, 0, NULL, NULL, on_request, NULL, MHD_OPTION_EXTERNAL_LOGGER, log_mhd, NULL,
                             MHD_OPTION_SOCK_ADDR, sa,
                             MHD_OPTION_THREAD_POOL_SIZE, o->threads, MHD_OPTION_CONNECTION_TIMEOUT,
                             (unsigned)30, MHD_OPTION_CONNECTION_LIMIT, (unsigned)256,
                             MHD_OPTION_PER_IP_CONNECTION_LIMIT, (unsigned)64,
                             MHD_OPTION_CONNECTION_MEMORY_LIMIT, (size_t)(128 * 1024),
                             MHD_OPTION_NOTIFY_COMPLETED, on_completed, NULL,
                             MHD_OPTION_END);
    if (!d) {
        /* libmicrohttpd's reason is after its last ": " ("Failed to bind to
         * port ...: Cannot assign requested address") */
        const char *why = strrchr(g_start_msg, ':');
        fprintf(stderr, "fxledger: error: serve: cannot listen on %s port %u: %s\n", o->address, o->port,
                why && why[1] == ' ' ? why + 2 : g_start_msg[0] ? g_start_msg : strerror(errno));
        rc = FXL_EIO;
        goto cleanup;
    }
    g_running = 1;
    info = MHD_get_daemon_info(d, MHD_DAEMON_INFO_BIND_PORT);
    if (!o->quiet) {
        fprintf(stderr, "fxledger serve: listening on %s://%s%s%s:%u/ (%u threads; stop with Ctrl-C)\n",
                cert ? "https" : "http", sa == (const struct sockaddr *)&sa6 ? "[" : "", o->address,
                sa == (const struct sockaddr *)&sa6 ? "]" : "", info ? (unsigned)info->port : o->port,
                o->threads);
        fflush(stderr);
    }
    while (sigwait(&set, &sig) == 0 && sig != SIGINT && sig != SIGTERM)
        ;
    MHD_stop_daemon(d);
    if (!o->quiet)
        fprintf(stderr, "fxledger serve: stopped\n");

cleanup:
    free(cert);
    if (key) {
        memset(key, 0, strlen(key));
        free(key);
    }
    return rc;
}

/* Sessions of the web console. The cookie carries the identity layer's
 * session token (256 random bits as 64 hex digits; the store keeps only its
 * SHA-256, checks idle and absolute limits and the account's state on every
 * request: fxl/auth.h). The CSRF token is an HMAC-SHA-256, under a key
 * drawn at each start of the server, of the session token (or, before
 * login, of a random pre-login cookie): a page carries it in its forms, a
 * state-changing request must send it back, and a site elsewhere can
 * neither read nor compute it. API calls with a bearer token carry no
 * cookie and need no CSRF token. Decisions: docs/console.md. */
#include <pthread.h>
#include <sodium.h>
#include <stdio.h>
#include <string.h>

#include "fxl/api_tokens.h"
#include "fxl/auth.h"
#include "fxl/users.h"
#include "web/web.h"

#define COOKIE_SESSION "fxl_session"
#define COOKIE_PRE "fxl_pre"

static unsigned char g_key[crypto_auth_hmacsha256_KEYBYTES];
static pthread_once_t g_key_once = PTHREAD_ONCE_INIT;

static void key_init(void)
{
    if (sodium_init() < 0)
        abort();
    randombytes_buf(g_key, sizeof g_key);
}

static void csrf_for(char out[65], const char *purpose, const char *secret)
{
    unsigned char mac[crypto_auth_hmacsha256_BYTES];
    crypto_auth_hmacsha256_state st;

    pthread_once(&g_key_once, key_init);
    crypto_auth_hmacsha256_init(&st, g_key, sizeof g_key);
    crypto_auth_hmacsha256_update(&st, (const unsigned char *)purpose, strlen(purpose));
    crypto_auth_hmacsha256_update(&st, (const unsigned char *)secret, strlen(secret));
    crypto_auth_hmacsha256_final(&st, mac);
    sodium_bin2hex(out, 65, mac, sizeof mac);
}

static int is_hex64(const char *s)
{
    size_t i;
    if (!s || strlen(s) != 64)
        return 0;
    for (i = 0; i < 64; i++)
        if (!((s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f')))
            return 0;
    return 1;
}

void web_client(web_req *r, struct fxl_client *out)
{
    memset(out, 0, sizeof *out);
    out->kind = "web";
    out->address = r->client;
}

int web_session_check(web_req *r, int api)
{
    const char *auth = api ? web_header(r, "Authorization") : NULL;
    const char *cookie;
    fxl_session_info info;
    int rc;

    r->authenticated = 0;
    r->by_token = 0;
    if (auth && strncmp(auth, "Bearer ", 7) == 0) {
        if ((rc = fxl_api_token_check(r->ctx, auth + 7)) != 0)
            return rc;
        r->authenticated = 1;
        r->by_token = 1;
        snprintf(r->login, sizeof r->login, "%s", fxl_user_login(r->ctx));
        snprintf(r->full_name, sizeof r->full_name, "%s", fxl_user_login(r->ctx));
        r->role = fxl_user_role(r->ctx);
        snprintf(r->token, sizeof r->token, "%s", auth + 7);
        return 0;
    }
    cookie = web_cookie(r, COOKIE_SESSION);
    if (!is_hex64(cookie))
        return FXL_EAUTH;
    if ((rc = fxl_session_check(r->ctx, cookie, &info)) != 0)
        return rc;
    r->authenticated = 1;
    snprintf(r->login, sizeof r->login, "%s", info.user.login);
    snprintf(r->full_name, sizeof r->full_name, "%s", info.user.full_name);
    r->role = info.user.role;
    snprintf(r->token, sizeof r->token, "%s", cookie);
    csrf_for(r->csrf, "session:", cookie);
    return 0;
}

void web_prelogin(web_req *r)
{
    const char *pre = web_cookie(r, COOKIE_PRE);
    char fresh[65];
    unsigned char raw[32];

    if (!is_hex64(pre)) {
        randombytes_buf(raw, sizeof raw);
        sodium_bin2hex(fresh, sizeof fresh, raw, sizeof raw);
        snprintf(r->cookie, sizeof r->cookie, COOKIE_PRE "=%s; Path=/; HttpOnly; SameSite=Strict%s", fresh,
                 r->tls ? "; Secure" : "");
        pre = fresh;
    }
    csrf_for(r->csrf, "prelogin:", pre);
}

int web_csrf_check(web_req *r)
{
    const char *sent = web_arg(r, "csrf");
    char expect[65];

    if (!sent)
        sent = web_header(r, "X-CSRF-Token");
    if (r->authenticated && r->by_token)
        return 0;
    if (r->authenticated)
        snprintf(expect, sizeof expect, "%s", r->csrf);
    else {
        const char *pre = web_cookie(r, COOKIE_PRE);
        if (!is_hex64(pre))
            return -1;
        csrf_for(expect, "prelogin:", pre);
    }
    if (!sent || strlen(sent) != 64 || sodium_memcmp(sent, expect, 64) != 0)
        return -1;
    return 0;
}

void web_set_session_cookie(web_req *r, const char *token)
{
    if (token)
        snprintf(r->cookie, sizeof r->cookie, COOKIE_SESSION "=%s; Path=/; HttpOnly; SameSite=Strict%s",
                 token, r->tls ? "; Secure" : "");
    else
        snprintf(r->cookie, sizeof r->cookie,
                 COOKIE_SESSION "=; Path=/; Max-Age=0; HttpOnly; SameSite=Strict%s", r->tls ? "; Secure" : "");
}

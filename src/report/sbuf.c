#include "report/sbuf.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int reserve(sp_sbuf *b, size_t extra)
{
    if (b->failed)
        return 0;
    if (b->len + extra + 1 <= b->cap)
        return 1;
    size_t ncap = b->cap ? b->cap : 4096;
    while (ncap < b->len + extra + 1) {
        if (ncap > ((size_t)-1) / 2) {
            b->failed = 1;
            return 0;
        }
        ncap *= 2;
    }
    char *n = realloc(b->s, ncap);
    if (!n) {
        b->failed = 1;
        return 0;
    }
    b->s = n;
    b->cap = ncap;
    return 1;
}

void sp_sbuf_put(sp_sbuf *b, const char *s, size_t n)
{
    if (!reserve(b, n))
        return;
    memcpy(b->s + b->len, s, n);
    b->len += n;
    b->s[b->len] = 0;
}

void sp_sbuf_puts(sp_sbuf *b, const char *s)
{
    sp_sbuf_put(b, s, strlen(s));
}

void sp_sbuf_printf(sp_sbuf *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n < 0 || !reserve(b, (size_t)n))
        return;
    va_start(ap, fmt);
    vsnprintf(b->s + b->len, (size_t)n + 1, fmt, ap);
    va_end(ap);
    b->len += (size_t)n;
}

void sp_sbuf_esc(sp_sbuf *b, const char *s)
{
    for (; s && *s; s++) {
        switch (*s) {
        case '&':
            sp_sbuf_puts(b, "&amp;");
            break;
        case '<':
            sp_sbuf_puts(b, "&lt;");
            break;
        case '>':
            sp_sbuf_puts(b, "&gt;");
            break;
        case '"':
            sp_sbuf_puts(b, "&quot;");
            break;
        default:
            sp_sbuf_put(b, s, 1);
        }
    }
}

void sp_sbuf_base64(sp_sbuf *b, const unsigned char *p, size_t n)
{
    static const char tab[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    if (!reserve(b, (n + 2) / 3 * 4))
        return;
    char *o = b->s + b->len;
    size_t i = 0;
    for (; i + 2 < n; i += 3) {
        unsigned v = (unsigned)p[i] << 16 | (unsigned)p[i + 1] << 8 | p[i + 2];
        *o++ = tab[v >> 18 & 63];
        *o++ = tab[v >> 12 & 63];
        *o++ = tab[v >> 6 & 63];
        *o++ = tab[v & 63];
    }
    if (i < n) {
        unsigned v = (unsigned)p[i] << 16 | (i + 1 < n ? (unsigned)p[i + 1] << 8 : 0);
        *o++ = tab[v >> 18 & 63];
        *o++ = tab[v >> 12 & 63];
        *o++ = i + 1 < n ? tab[v >> 6 & 63] : '=';
        *o++ = '=';
    }
    b->len = (size_t)(o - b->s);
    b->s[b->len] = 0;
}

void sp_sbuf_free(sp_sbuf *b)
{
    free(b->s);
    memset(b, 0, sizeof *b);
}

/* A growable text buffer for building SVG and HTML in memory. An allocation failure is sticky:
 * later appends do nothing and sp_sbuf_failed reports it once, at the end. */
#ifndef SP_REPORT_SBUF_H
#define SP_REPORT_SBUF_H

#include <stddef.h>

typedef struct sp_sbuf {
    char *s; /* NUL-terminated text (owned) */
    size_t len, cap;
    int failed;
} sp_sbuf;

void sp_sbuf_printf(sp_sbuf *b, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
void sp_sbuf_put(sp_sbuf *b, const char *s, size_t n);
void sp_sbuf_puts(sp_sbuf *b, const char *s);
/* Text with &, <, >, " escaped for HTML/SVG. */
void sp_sbuf_esc(sp_sbuf *b, const char *s);
/* Bytes as base64 (RFC 4648), for data: URIs. */
void sp_sbuf_base64(sp_sbuf *b, const unsigned char *p, size_t n);
void sp_sbuf_free(sp_sbuf *b);

#endif

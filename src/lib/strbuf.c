/* strandecho: a growable text buffer for the documents the library writes (SVG, HTML). */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

void se_strbuf_add(se_strbuf *b, const char *s, size_t n)
{
    if (b->failed)
        return;
    if (b->len + n + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 4096;
        char *p;
        while (cap < b->len + n + 1) {
            if (cap > ((size_t)-1) / 2) {
                b->failed = 1;
                return;
            }
            cap *= 2;
        }
        p = realloc(b->p, cap);
        if (p == NULL) {
            b->failed = 1;
            return;
        }
        b->p = p;
        b->cap = cap;
    }
    memcpy(b->p + b->len, s, n);
    b->len += n;
    b->p[b->len] = '\0';
}

void se_strbuf_vprintf(se_strbuf *b, const char *fmt, va_list ap)
{
    char tmp[1024];
    va_list again;
    int n;
    va_copy(again, ap);
    n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    if (n < 0) {
        b->failed = 1;
    } else if ((size_t)n < sizeof tmp) {
        se_strbuf_add(b, tmp, (size_t)n);
    } else {
        char *big = malloc((size_t)n + 1);
        if (big == NULL) {
            b->failed = 1;
        } else {
            vsnprintf(big, (size_t)n + 1, fmt, again);
            se_strbuf_add(b, big, (size_t)n);
            free(big);
        }
    }
    va_end(again);
}

void se_strbuf_printf(se_strbuf *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    se_strbuf_vprintf(b, fmt, ap);
    va_end(ap);
}

void se_strbuf_xml_escape(se_strbuf *b, const char *s)
{
    if (s == NULL)
        return;
    for (; *s; s++) {
        switch (*s) {
        case '&': se_strbuf_add(b, "&amp;", 5); break;
        case '<': se_strbuf_add(b, "&lt;", 4); break;
        case '>': se_strbuf_add(b, "&gt;", 4); break;
        case '"': se_strbuf_add(b, "&quot;", 6); break;
        case '\'': se_strbuf_add(b, "&#39;", 5); break;
        default:
            if ((unsigned char)*s < 0x20 && *s != '\t' && *s != '\n')
                se_strbuf_add(b, " ", 1); /* control characters are not allowed in XML 1.0 */
            else
                se_strbuf_add(b, s, 1);
        }
    }
}

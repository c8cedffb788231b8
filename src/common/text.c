/* UTF-8 cleaning and CSV fields for text from files (text.h). */
#include "text.h"

#include <stdlib.h>
#include <string.h>

#include "internal.h"

size_t rt_utf8_sequence(const unsigned char *s, size_t avail, unsigned *code)
{
    if (avail == 0)
        return 0;
    unsigned c = s[0];
    size_t len;
    unsigned min;
    if (c < 0x80) {
        *code = c;
        return 1;
    }
    if ((c & 0xE0) == 0xC0) { len = 2; min = 0x80; c &= 0x1F; }
    else if ((c & 0xF0) == 0xE0) { len = 3; min = 0x800; c &= 0x0F; }
    else if ((c & 0xF8) == 0xF0) { len = 4; min = 0x10000; c &= 0x07; }
    else return 0;
    if (len > avail)
        return 0;
    for (size_t i = 1; i < len; i++) {
        if ((s[i] & 0xC0) != 0x80)
            return 0;
        c = (c << 6) | (s[i] & 0x3F);
    }
    if (c < min || c > 0x10FFFF || (c >= 0xD800 && c <= 0xDFFF))
        return 0;
    *code = c;
    return len;
}

char *rt_utf8_clean(const char *text, bool xml)
{
    if (!text)
        text = "";
    size_t n = strlen(text);
    /* each input byte becomes at most 3 output bytes (U+FFFD) */
    char *out = rt_calloc(3 * n + 1, 1);
    if (!out)
        return NULL;
    const unsigned char *s = (const unsigned char *)text;
    const unsigned char *end = s + n;
    size_t o = 0;
    while (s < end) {
        unsigned code = 0;
        size_t len = rt_utf8_sequence(s, (size_t)(end - s), &code);
        if (len == 0 || (xml && (code == 0xFFFE || code == 0xFFFF))) {
            memcpy(out + o, "\xEF\xBF\xBD", 3);
            o += 3;
            s += len ? len : 1;
        } else if (xml && code < 0x20 && code != '\t' && code != '\n') {
            out[o++] = ' ';
            s++;
        } else {
            memcpy(out + o, s, len);
            o += len;
            s += len;
        }
    }
    out[o] = '\0';
    return out;
}

int rt_csv_put_field(FILE *f, const char *s)
{
    char *clean = rt_utf8_clean(s, false);
    if (!clean)
        return -1;
    bool formula = clean[0] == '=' || clean[0] == '+' || clean[0] == '-' || clean[0] == '@' ||
                   clean[0] == '\t' || clean[0] == '\r';
    bool quote = strpbrk(clean, ",\"\r\n") != NULL;
    if (quote)
        fputc('"', f);
    if (formula)
        fputc('\'', f);
    for (const char *c = clean; *c; c++) {
        if (*c == '"')
            fputc('"', f);
        fputc(*c, f);
    }
    if (quote)
        fputc('"', f);
    free(clean);
    return 0;
}

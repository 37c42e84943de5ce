/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "json.h"

#include <math.h>

void cli_json_string(FILE *f, const char *s)
{
    fputc('"', f);
    for (const unsigned char *c = (const unsigned char *)s; *c; ++c) {
        switch (*c) {
        case '"':
            fputs("\\\"", f);
            break;
        case '\\':
            fputs("\\\\", f);
            break;
        case '\n':
            fputs("\\n", f);
            break;
        case '\r':
            fputs("\\r", f);
            break;
        case '\t':
            fputs("\\t", f);
            break;
        default:
            if (*c < 0x20) {
                fprintf(f, "\\u%04x", (unsigned)*c);
            } else {
                fputc(*c, f);
            }
        }
    }
    fputc('"', f);
}

void cli_json_number(FILE *f, double v)
{
    if (isfinite(v)) {
        fprintf(f, "%.10g", v);
    } else {
        fputs("null", f);
    }
}

void cli_json_key(FILE *f, const char *key, int first)
{
    if (!first) {
        fputs(", ", f);
    }
    cli_json_string(f, key);
    fputs(": ", f);
}

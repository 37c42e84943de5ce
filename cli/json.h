/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The little JSON the tool writes (RFC 8259): strings escaped, numbers that are
 * not finite written as null, since JSON has no NaN or infinity. */

#ifndef CLI_JSON_H
#define CLI_JSON_H

#include <stdio.h>

/** Write @p s as a JSON string (quoted, escaped). */
void cli_json_string(FILE *f, const char *s);

/** Write @p v with 10 significant digits, or null if it is not finite. */
void cli_json_number(FILE *f, double v);

/** Write "key": (with the key escaped) after a comma unless @p first. */
void cli_json_key(FILE *f, const char *key, int first);

#endif

/* SPDX-License-Identifier: MIT */
/* JSON files (flow/json.c): private helpers for the library's readers and writers. */
#ifndef SINEW_INTERNAL_JSON_H
#define SINEW_INTERNAL_JSON_H

#include <stddef.h>

#include <cJSON.h>

#include "flow/core.h"

/* Write a cJSON value as formatted text plus a newline, atomically. */
int sinew__json_write(sinew_ctx *ctx, const char *path, const cJSON *obj);
/* Parse text (len bytes, no terminator needed) read from path; EFORMAT "PATH: invalid
 * JSON near byte N". */
int sinew__json_parse(sinew_ctx *ctx, const char *path, const char *text, size_t len, cJSON **out);
/* Read and parse a JSON file of at most max_bytes; EFORMAT naming the file. */
int sinew__json_read(sinew_ctx *ctx, const char *path, size_t max_bytes, cJSON **out);
/* obj[key] as a finite number, else NaN (missing key, other type, obj not an object). */
double sinew__json_num(const cJSON *obj, const char *key);
/* obj[key] as a string, else NULL. */
const char *sinew__json_str(const cJSON *obj, const char *key);

#endif

/* SPDX-License-Identifier: MIT */
/* Paths and folders (flow/fs.c): private helpers for the library's file-writing modules. */
#ifndef SINEW_INTERNAL_FS_H
#define SINEW_INTERNAL_FS_H

#include <stddef.h>

#include "flow/core.h"

/* Longest path the library builds in a fixed buffer. */
#define SINEW__PATH_MAX 4096

/* "a/b" into buf of n bytes; ELIMIT naming the path when it does not fit. */
int sinew__path_join(sinew_ctx *ctx, char *buf, size_t n, const char *a, const char *b);
/* mkdir -p; EIO naming the folder. */
int sinew__mkdirs(sinew_ctx *ctx, const char *path);
/* "a/b" in a new string (NULL when out of memory). */
char *sinew__dup_join(sinew_ctx *ctx, const char *a, const char *b);
/* Names in folder `dir` that keep() accepts, sorted by name (byte order): "dir/name" with
 * `join`, else the bare name. EIO names an unreadable folder; ELIMIT when more than `max`
 * names are accepted. *out (n strings) is freed with sinew__free_names. */
int sinew__list_dir(sinew_ctx *ctx, const char *dir, int (*keep)(const char *name), int join,
                    size_t max, char ***out, size_t *n);
void sinew__free_names(sinew_ctx *ctx, char **names, size_t n);
/* ECONFIG naming path when it is a symbolic link (sinew never writes or deletes through
 * one); SINEW_OK otherwise, also when it does not exist. */
int sinew__refuse_link(sinew_ctx *ctx, const char *path);
/* 1 when existing `path` is `dir` or lies below it once both are resolved (realpath:
 * links, ".", ".."); 0 otherwise, also when either cannot be resolved. */
int sinew__path_inside(const char *path, const char *dir);

#endif

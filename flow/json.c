/* SPDX-License-Identifier: MIT */
/* JSON files: read and parse with a size limit, write formatted text atomically. */
#include <string.h>

#include <cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/json.h"

int sinew__json_write(sinew_ctx *ctx, const char *path, const cJSON *obj)
{
    char *text = cJSON_Print(obj);
    if (!text)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory formatting JSON", path);
    size_t n = strlen(text);
    text[n] = '\n'; /* replace the terminator: cJSON output is text, add a final newline */
    int rc = sinew_write_file(ctx, path, text, n + 1);
    cJSON_free(text);
    return rc;
}

int sinew__json_read(sinew_ctx *ctx, const char *path, size_t max_bytes, cJSON **out)
{
    *out = NULL;
    unsigned char *buf;
    size_t len;
    int rc = sinew_read_file(ctx, path, max_bytes, &buf, &len);
    if (rc)
        return rc;
    const char *end = NULL;
    cJSON *j = cJSON_ParseWithLengthOpts((const char *)buf, len, &end, 0);
    size_t off = end ? (size_t)(end - (const char *)buf) : 0;
    sinew_ctx_dealloc(ctx, buf);
    if (!j)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: invalid JSON near byte %zu", path, off);
    *out = j;
    return SINEW_OK;
}

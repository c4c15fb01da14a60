/* SPDX-License-Identifier: MIT */
/* JSON files: read and parse with a size limit, write formatted text atomically;
 * number-or-null and string-or-null writers (flow/json.h); strict getters. */
#include <math.h>
#include <string.h>

#include <cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/json.h"
#include "flow/json.h"

int sinew__json_write(sinew_ctx *ctx, const char *path, const cJSON *obj)
{
    char *text = cJSON_Print(obj);
    if (!text)
        return sinew__fail(ctx, SINEW_ENOMEM, "%s: out of memory formatting JSON", path);
    /* file names may hold any bytes: written as valid UTF-8 (flow/core.h) */
    int rc = sinew_write_json_text(ctx, path, text);
    cJSON_free(text);
    return rc;
}

int sinew__json_parse(sinew_ctx *ctx, const char *path, const char *text, size_t len, cJSON **out)
{
    const char *end = NULL;
    *out = cJSON_ParseWithLengthOpts(text, len, &end, 0);
    if (!*out) {
        size_t off = end ? (size_t)(end - text) : 0;
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: invalid JSON near byte %zu", path, off);
    }
    return SINEW_OK;
}

int sinew__json_read(sinew_ctx *ctx, const char *path, size_t max_bytes, cJSON **out)
{
    *out = NULL;
    unsigned char *buf;
    size_t len;
    int rc = sinew_read_file(ctx, &buf, &len, path, max_bytes);
    if (rc)
        return rc;
    rc = sinew__json_parse(ctx, path, (const char *)buf, len, out);
    sinew_ctx_dealloc(ctx, buf);
    return rc;
}

cJSON *sinew_json_number(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

cJSON *sinew_json_add_number(cJSON *obj, const char *key, double v)
{
    cJSON *item = sinew_json_number(v);
    if (item && !cJSON_AddItemToObject(obj, key, item)) {
        cJSON_Delete(item);
        return NULL;
    }
    return item;
}

cJSON *sinew_json_add_string(cJSON *obj, const char *key, const char *s)
{
    cJSON *item = s ? cJSON_CreateString(s) : cJSON_CreateNull();
    if (item && !cJSON_AddItemToObject(obj, key, item)) {
        cJSON_Delete(item);
        return NULL;
    }
    return item;
}

double sinew__json_num(const cJSON *obj, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    return cJSON_IsNumber(v) && isfinite(v->valuedouble) ? v->valuedouble : NAN;
}

const char *sinew__json_str(const cJSON *obj, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    return cJSON_IsString(v) && v->valuestring ? v->valuestring : NULL;
}

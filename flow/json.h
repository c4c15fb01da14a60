/* SPDX-License-Identifier: MIT */
/* Writing JSON with cJSON the way every sinew output does (flow/json.c): numbers that
 * are not finite and strings that are absent become null, so files stay valid JSON
 * (JSON has no NaN or infinity) and readers see one spelling of "no value". For the
 * library's writers and for programs that build sinew-style JSON with cJSON. The
 * cJSON type is only declared here; include <cJSON.h> to build objects. */
#ifndef SINEW_JSON_H
#define SINEW_JSON_H

#ifdef __cplusplus
extern "C" {
#endif

struct cJSON;

/* A number item, or null when v is NaN or infinite. NULL when out of memory. */
struct cJSON *sinew_json_number(double v);
/* Add obj[key] = v (number, or null when not finite). Returns the item, NULL on
 * failure (out of memory, obj not an object). */
struct cJSON *sinew_json_add_number(struct cJSON *obj, const char *key, double v);
/* Add obj[key] = s (string, or null when s is NULL). Returns the item or NULL. */
struct cJSON *sinew_json_add_string(struct cJSON *obj, const char *key, const char *s);

#ifdef __cplusplus
}
#endif
#endif

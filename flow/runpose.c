/* SPDX-License-Identifier: MIT */
/* Camera poses in a run (sequence.json frames[].pose, camera-to-world [R | t]):
 *
 * The pose check. A pair's lifted matches (X0 in camera 0, X1 in camera 1, with their
 * weights) are fitted by one rigid motion, which should be the cameras' relative motion
 * T = inv(P1) P0 wherever the scene is static. The scenes sinew serves deform, so the
 * fit is robust: least trimmed squares (Rousseeuw, JASA 1984) keeping the half of the
 * weighted rows with the smallest residuals (the estimator's largest breakdown point),
 * found by concentration steps (Rousseeuw & Van Driessen, Data Min. Knowl. Disc. 2006):
 * fit, keep the h rows closest to the fit, refit, until the kept set no longer changes
 * (at most POSE_CSTEPS steps). Each fit is the weighted Kabsch fit of flow/rigid.h. The
 * distance between the fit and the given T (translation in metres, rotation in degrees)
 * goes into stats.json: a wrong depth scale scales the fitted translation, wrong
 * intrinsics bend it; neither needs ground truth. It is a diagnostic, never a failure.
 *
 * The world frame (--world-frame): X0 and its normal are mapped by P0, X1 and its normal
 * by P1, so both ends of every match are in the sequence's world coordinates. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>

#include "flow/internal/base.h"
#include "flow/internal/run.h"
#include "flow/json.h"
#include "flow/match.h"
#include "flow/rigid.h"

/* Most concentration steps; they converge in a handful on every pair we tried (the
 * kept set can only shrink the trimmed sum, so the loop ends; this caps the cost). */
#define POSE_CSTEPS 20

/* Columns of the first point, the second point and the weight; 0 when not lifted. */
static int lifted_columns(const sinew_matches *m, int *x0, int *x1, int *w)
{
    *x0 = sinew_matches_column(m, "X0");
    *x1 = sinew_matches_column(m, "X1");
    *w = sinew_matches_column(m, "weight");
    return m->has_depth && *x0 >= 0 && *x1 >= 0 && *w >= 0;
}

typedef struct {
    double r;
    size_t i;
} ranked;

static int cmp_ranked(const void *a, const void *b)
{
    const ranked *x = a, *y = b;
    if (x->r != y->r)
        return x->r < y->r ? -1 : 1;
    return (x->i > y->i) - (x->i < y->i);
}

static int less(const ranked *a, const ranked *b)
{
    return cmp_ranked(a, b) < 0;
}

/* Reorder rk so that its first h entries are the h smallest (residual, then index: a
 * strict order, so the set is unique whatever the algorithm): quickselect (Hoare 1961)
 * with a median-of-three pivot, O(n) on average instead of sorting; ranges of up to 16
 * entries are finished by insertion sort. */
static void select_smallest(ranked *rk, size_t n, size_t h)
{
    size_t lo = 0, hi = n; /* the boundary h lies in [lo, hi] */
    while (hi - lo > 16 && h > lo && h < hi) {
        size_t mid = lo + (hi - lo) / 2, last = hi - 1;
        ranked t;
        if (less(&rk[mid], &rk[lo]))
            t = rk[mid], rk[mid] = rk[lo], rk[lo] = t;
        if (less(&rk[last], &rk[lo]))
            t = rk[last], rk[last] = rk[lo], rk[lo] = t;
        if (less(&rk[last], &rk[mid]))
            t = rk[last], rk[last] = rk[mid], rk[mid] = t;
        ranked pivot = rk[mid];
        size_t i = lo, j = last;
        for (;;) { /* Hoare partition: [lo, j] <= pivot <= [j + 1, hi) */
            while (less(&rk[i], &pivot))
                i++;
            while (less(&pivot, &rk[j]))
                j--;
            if (i >= j)
                break;
            t = rk[i], rk[i] = rk[j], rk[j] = t;
            i++;
            j--;
        }
        if (h <= j)
            hi = j + 1;
        else
            lo = j + 1;
    }
    for (size_t a = lo + 1; a < hi; a++) {
        ranked t = rk[a];
        size_t b = a;
        for (; b > lo && less(&t, &rk[b - 1]); b--)
            rk[b] = rk[b - 1];
        rk[b] = t;
    }
}

static double residual(const sinew_rigid *T, const float *p)
{
    double a[3] = {p[0], p[1], p[2]}, b[3];
    sinew_rigid_apply(T, a, b);
    return sqrt((b[0] - p[3]) * (b[0] - p[3]) + (b[1] - p[4]) * (b[1] - p[4]) +
                (b[2] - p[5]) * (b[2] - p[5]));
}

/* The trimmed fit over n packed rows (X0 X1 weight, stride 7; every weight > 0 at the
 * start, the trimmed rows' set to 0 here, so a row is kept exactly when its weight is
 * not 0). */
static int trimmed_fit(sinew_ctx *ctx, sinew_rigid *T, double *rms, float *pk, const float *w,
                       size_t n, size_t h, ranked *rk)
{
    int rc = sinew_rigid_fit(ctx, T, rms, pk, pk + 3, pk + 6, n, 7);
    for (int step = 0; !rc && step < POSE_CSTEPS; step++) {
        for (size_t i = 0; i < n; i++) {
            rk[i].r = residual(T, pk + 7 * i);
            rk[i].i = i;
        }
        select_smallest(rk, n, h);
        int changed = 0;
        for (size_t k = 0; k < n; k++) {
            float *wk = &pk[7 * rk[k].i + 6];
            int keep = k < h;
            changed |= (*wk != 0.0f) != keep;
            *wk = keep ? w[rk[k].i] : 0.0f;
        }
        if (!changed)
            break;
        rc = sinew_rigid_fit(ctx, T, rms, pk, pk + 3, pk + 6, n, 7);
    }
    return rc;
}

int sinew__run_pose_check(sinew_ctx *ctx, cJSON *stats, const sinew_matches *m,
                          const double pose0[12], const double pose1[12])
{
    int c0, c1, cw;
    if (!lifted_columns(m, &c0, &c1, &cw))
        return SINEW_OK;
    size_t n = 0;
    for (size_t r = 0; r < m->rows; r++) {
        const float *row = m->data + r * (size_t)m->cols;
        n += row[cw] > 0 && isfinite(row[cw]);
    }
    if (n < 3)
        return SINEW_OK;
    float *pk = sinew__alloc(ctx, n * 7 * sizeof *pk), *w = sinew__alloc(ctx, n * sizeof *w);
    ranked *rk = sinew__alloc(ctx, n * sizeof *rk);
    int rc = pk && w && rk ? SINEW_OK : SINEW_ENOMEM;
    for (size_t r = 0, i = 0; !rc && r < m->rows; r++) {
        const float *row = m->data + r * (size_t)m->cols;
        if (!(row[cw] > 0 && isfinite(row[cw])))
            continue;
        memcpy(pk + 7 * i, row + c0, 3 * sizeof *pk);
        memcpy(pk + 7 * i + 3, row + c1, 3 * sizeof *pk);
        pk[7 * i + 6] = w[i] = row[cw];
        i++;
    }
    sinew_rigid fit, P0, P1, given, id;
    double rms = NAN, dt, deg, gt, gdeg;
    size_t h = (n + 1) / 2;
    if (!rc)
        rc = trimmed_fit(ctx, &fit, &rms, pk, w, n, h, rk);
    sinew__free(ctx, pk);
    sinew__free(ctx, w);
    sinew__free(ctx, rk);
    if (rc == SINEW_ENOMEM)
        return rc;
    if (rc) { /* degenerate points (e.g. a flat wall seen edge-on): no check */
        sinew_ctx_clear(ctx);
        return SINEW_OK;
    }
    sinew_rigid_from_pose(&P0, pose0);
    sinew_rigid_from_pose(&P1, pose1);
    sinew_rigid_relative(&P0, &P1, &given);
    sinew_rigid_identity(&id);
    sinew_rigid_distance(&fit, &given, &dt, &deg);
    sinew_rigid_distance(&given, &id, &gt, &gdeg);
    cJSON *o = cJSON_AddObjectToObject(stats, "pose_check");
    if (!o || !cJSON_AddNumberToObject(o, "rows", (double)n) ||
        !cJSON_AddNumberToObject(o, "kept_rows", (double)h) ||
        !sinew_json_add_number(o, "fit_rms_m", rms) ||
        !sinew_json_add_number(o, "translation_error_m", dt) ||
        !sinew_json_add_number(o, "rotation_error_deg", deg) ||
        !sinew_json_add_number(o, "given_translation_m", gt) ||
        !sinew_json_add_number(o, "given_rotation_deg", gdeg))
        return SINEW_ENOMEM;
    return SINEW_OK;
}

/* Map the 3-vector at p by T in place: a point (move) or a direction (rotation only). */
static void map3(const sinew_rigid *T, float *p, int move)
{
    double a[3] = {p[0], p[1], p[2]};
    if (move)
        sinew_rigid_apply(T, a, a);
    else
        sinew_rigid_rotate(T, a, a);
    for (int k = 0; k < 3; k++)
        p[k] = (float)a[k];
}

void sinew__run_to_world(sinew_matches *m, const double pose0[12], const double pose1[12])
{
    int c0, c1, cw;
    if (!lifted_columns(m, &c0, &c1, &cw))
        return;
    sinew_rigid P[2];
    sinew_rigid_from_pose(&P[0], pose0);
    sinew_rigid_from_pose(&P[1], pose1);
    int n0 = sinew_matches_column(m, "nx0"), n1 = sinew_matches_column(m, "nx1");
    for (size_t r = 0; r < m->rows; r++) {
        float *row = m->data + r * (size_t)m->cols;
        map3(&P[0], row + c0, 1);
        map3(&P[1], row + c1, 1);
        if (n0 >= 0)
            map3(&P[0], row + n0, 0);
        if (n1 >= 0)
            map3(&P[1], row + n1, 0);
    }
}

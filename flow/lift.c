/* SPDX-License-Identifier: MIT */
/* Lifting correspondences to 3-D: the per-pixel depth rules (hole-aware bilinear
 * target depth, edge and straddle tests, displacement bound, normals from depth
 * gradients) that sinew_matches_build (flow/match.c) applies. */

#include <ctype.h>
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"
#include "flow/internal/lift.h"

/* ---- per-pixel rules ---- */

/* Every coordinate finite and within float32 range (so the stored table stays finite). */
static int fits_float(const double X[3])
{
    for (int k = 0; k < 3; k++)
        if (!(fabs(X[k]) <= FLT_MAX))
            return 0;
    return 1;
}

static inline float zat(const sinew_image *d, int x, int y)
{
    return sinew_image_row_f32(d, y)[x];
}

/* True if the (2r+1)^2 window around (cx, cy), clipped to the image, holds an invalid
 * depth or a relative jump (max - min) / min above rel. */
static int window_edge(const sinew_image *d, int cx, int cy, int r, double rel)
{
    if (r <= 0)
        return 0;
    int x0 = cx - r < 0 ? 0 : cx - r, x1 = cx + r > d->width - 1 ? d->width - 1 : cx + r;
    int y0 = cy - r < 0 ? 0 : cy - r, y1 = cy + r > d->height - 1 ? d->height - 1 : cy + r;
    float lo = INFINITY, hi = -INFINITY;
    for (int y = y0; y <= y1; y++) {
        const float *row = sinew_image_row_f32(d, y);
        for (int x = x0; x <= x1; x++) {
            float z = row[x];
            if (!(z > 0) || !isfinite(z))
                return 1;
            if (z < lo)
                lo = z;
            if (z > hi)
                hi = z;
        }
    }
    return (double)hi - lo > rel * lo;
}

/* Unit normal at integer pixel (x, y) from central differences of back-projected
 * neighbours, oriented towards the camera. 0 if not computable. */
static int normal_at(const sinew_image *d, const sinew_camera *cam, int x, int y, double n[3])
{
    if (x < 1 || y < 1 || x > d->width - 2 || y > d->height - 2)
        return 0;
    float zl = zat(d, x - 1, y), zr = zat(d, x + 1, y), zu = zat(d, x, y - 1),
          zd = zat(d, x, y + 1), zc = zat(d, x, y);
    if (!isfinite(zl) || !isfinite(zr) || !isfinite(zu) || !isfinite(zd) || !isfinite(zc))
        return 0;
    double L[3], R[3], U[3], D[3], C[3];
    sinew_camera_unproject(cam, x - 1, y, zl, L);
    sinew_camera_unproject(cam, x + 1, y, zr, R);
    sinew_camera_unproject(cam, x, y - 1, zu, U);
    sinew_camera_unproject(cam, x, y + 1, zd, D);
    sinew_camera_unproject(cam, x, y, zc, C);
    double a[3] = {R[0] - L[0], R[1] - L[1], R[2] - L[2]};
    double b[3] = {D[0] - U[0], D[1] - U[1], D[2] - U[2]};
    double c[3] = {a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]};
    double len = sqrt(c[0] * c[0] + c[1] * c[1] + c[2] * c[2]);
    if (!(len > 0) || !isfinite(len))
        return 0;
    double s = (c[0] * C[0] + c[1] * C[1] + c[2] * C[2]) > 0 ? -1.0 / len : 1.0 / len;
    for (int k = 0; k < 3; k++)
        n[k] = c[k] * s;
    return 1;
}

int sinew__lift_eval(const sinew_image *d0, const sinew_image *d1, const sinew_camera *cam,
                     const sinew_match_params *p, int x, int y, double u1, double v1,
                     sinew__lift_point *lp)
{
    float z0 = zat(d0, x, y);
    if (!(z0 > 0) || !isfinite(z0))
        return SINEW_REJECT_DEPTH0_INVALID;
    if (window_edge(d0, x, y, p->edge_radius, p->edge_rel))
        return SINEW_REJECT_DEPTH0_EDGE;
    /* Hole-aware bilinear depth at the target: every neighbour with non-zero weight must
     * be valid, and together they must not straddle an edge. */
    int bx = (int)floor(u1), by = (int)floor(v1);
    double ax = u1 - bx, ay = v1 - by;
    if (bx >= d1->width - 1) {
        bx = d1->width - 1;
        ax = 0;
    }
    if (by >= d1->height - 1) {
        by = d1->height - 1;
        ay = 0;
    }
    const double wt[4] = {(1 - ax) * (1 - ay), ax * (1 - ay), (1 - ax) * ay, ax * ay};
    double z1 = 0, lo = INFINITY, hi = -INFINITY;
    for (int k = 0; k < 4; k++) {
        if (wt[k] == 0)
            continue;
        float z = zat(d1, bx + (k & 1), by + (k >> 1));
        if (!(z > 0) || !isfinite(z))
            return SINEW_REJECT_DEPTH1_HOLE;
        z1 += wt[k] * z;
        if (z < lo)
            lo = z;
        if (z > hi)
            hi = z;
    }
    if (hi - lo > p->edge_rel * lo)
        return SINEW_REJECT_DEPTH1_STRADDLE;
    int tx = (int)floor(u1 + 0.5), ty = (int)floor(v1 + 0.5);
    if (tx > d1->width - 1)
        tx = d1->width - 1;
    if (ty > d1->height - 1)
        ty = d1->height - 1;
    if (window_edge(d1, tx, ty, p->edge_radius, p->edge_rel))
        return SINEW_REJECT_DEPTH1_EDGE;
    /* A point whose ray cannot be undistorted, or whose coordinates do not fit a float32
     * (absurd intrinsics or depth scale), has no usable 3-D position: the table promises
     * finite values. */
    if (!sinew_camera_unproject(cam, x, y, z0, lp->X0) || !fits_float(lp->X0))
        return SINEW_REJECT_DEPTH0_INVALID;
    if (!sinew_camera_unproject(cam, u1, v1, z1, lp->X1) || !fits_float(lp->X1))
        return SINEW_REJECT_DEPTH1_HOLE;
    double dx = lp->X1[0] - lp->X0[0], dy = lp->X1[1] - lp->X0[1], dz = lp->X1[2] - lp->X0[2];
    if (sqrt(dx * dx + dy * dy + dz * dz) > p->max_displacement)
        return SINEW_REJECT_DISPLACEMENT;
    memset(lp->n0, 0, sizeof lp->n0);
    memset(lp->n1, 0, sizeof lp->n1);
    if (p->normals && (!normal_at(d0, cam, x, y, lp->n0) || !normal_at(d1, cam, tx, ty, lp->n1)))
        return SINEW_REJECT_NORMAL;
    return SINEW_REJECT_COUNT;
}

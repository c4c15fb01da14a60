/* SPDX-License-Identifier: MIT */
/* Rigid transforms and camera poses (flow/rigid.h), and the weighted Kabsch/Umeyama
 * fit. */
#include "flow/rigid.h"

#include <ctype.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "flow/internal/base.h"

/* ---- rigid transforms ---- */

void sinew_rigid_identity(sinew_rigid *T)
{
    memset(T, 0, sizeof *T);
    T->R[0] = T->R[4] = T->R[8] = 1;
}

void sinew_rigid_apply(const sinew_rigid *T, const double x[3], double y[3])
{
    double r[3];
    for (int i = 0; i < 3; i++)
        r[i] = T->R[3 * i] * x[0] + T->R[3 * i + 1] * x[1] + T->R[3 * i + 2] * x[2] + T->t[i];
    memcpy(y, r, sizeof r);
}

void sinew_rigid_rotate(const sinew_rigid *T, const double x[3], double y[3])
{
    sinew_rigid R = *T;
    R.t[0] = R.t[1] = R.t[2] = 0;
    sinew_rigid_apply(&R, x, y);
}

void sinew_rigid_from_pose(sinew_rigid *T, const double pose[12])
{
    for (int r = 0; r < 3; r++) {
        for (int c = 0; c < 3; c++)
            T->R[3 * r + c] = pose[4 * r + c];
        T->t[r] = pose[4 * r + 3];
    }
}

void sinew_rigid_to_pose(double pose[12], const sinew_rigid *T)
{
    for (int r = 0; r < 3; r++) {
        for (int c = 0; c < 3; c++)
            pose[4 * r + c] = T->R[3 * r + c];
        pose[4 * r + 3] = T->t[r];
    }
}

void sinew_rigid_invert(const sinew_rigid *T, sinew_rigid *inv)
{
    sinew_rigid o;
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            o.R[3 * i + j] = T->R[3 * j + i];
    for (int i = 0; i < 3; i++)
        o.t[i] = -(o.R[3 * i] * T->t[0] + o.R[3 * i + 1] * T->t[1] + o.R[3 * i + 2] * T->t[2]);
    *inv = o;
}

void sinew_rigid_compose(const sinew_rigid *a, const sinew_rigid *b, sinew_rigid *c)
{
    sinew_rigid o;
    for (int i = 0; i < 3; i++) {
        for (int j = 0; j < 3; j++)
            o.R[3 * i + j] = a->R[3 * i] * b->R[j] + a->R[3 * i + 1] * b->R[3 + j] +
                             a->R[3 * i + 2] * b->R[6 + j];
        o.t[i] =
            a->R[3 * i] * b->t[0] + a->R[3 * i + 1] * b->t[1] + a->R[3 * i + 2] * b->t[2] + a->t[i];
    }
    *c = o;
}

void sinew_rigid_distance(const sinew_rigid *a, const sinew_rigid *b, double *dt, double *deg)
{
    if (dt)
        *dt = sqrt((a->t[0] - b->t[0]) * (a->t[0] - b->t[0]) +
                   (a->t[1] - b->t[1]) * (a->t[1] - b->t[1]) +
                   (a->t[2] - b->t[2]) * (a->t[2] - b->t[2]));
    if (deg) {
        /* M = Ra Rb^T; angle = atan2(|vee(M - M^T)| / 2, (trace M - 1) / 2), well
         * conditioned for small and large angles alike. */
        double M[9];
        for (int i = 0; i < 3; i++)
            for (int j = 0; j < 3; j++)
                M[3 * i + j] = a->R[3 * i] * b->R[3 * j] + a->R[3 * i + 1] * b->R[3 * j + 1] +
                               a->R[3 * i + 2] * b->R[3 * j + 2];
        double sx = M[7] - M[5], sy = M[2] - M[6], sz = M[3] - M[1];
        double sn = 0.5 * sqrt(sx * sx + sy * sy + sz * sz), cs = 0.5 * (M[0] + M[4] + M[8] - 1);
        *deg = atan2(sn, cs) * (180.0 / 3.14159265358979323846);
    }
}

void sinew_rigid_relative(const sinew_rigid *pose0, const sinew_rigid *pose1, sinew_rigid *T)
{
    sinew_rigid inv1;
    sinew_rigid_invert(pose1, &inv1);
    sinew_rigid_compose(&inv1, pose0, T);
}

int sinew_rigid_load(sinew_ctx *ctx, sinew_rigid *T, const char *path)
{
    if (!ctx || !T || !path)
        return SINEW_EINVAL;
    unsigned char *buf;
    size_t len;
    int rc = sinew_read_file(ctx, &buf, &len, path, (size_t)1 << 16);
    if (rc)
        return rc;
    double m[16];
    int n = 0;
    const char *s = (const char *)buf;
    while (*s) {
        if (isspace((unsigned char)*s) || *s == ',') {
            s++;
            continue;
        }
        char *end;
        double v = strtod(s, &end);
        if (end == s || n >= 16) {
            sinew_ctx_dealloc(ctx, buf);
            return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected 16 numbers (a 4x4 matrix)", path);
        }
        m[n++] = v;
        s = end;
    }
    sinew_ctx_dealloc(ctx, buf);
    if (n != 16)
        return sinew__fail(ctx, SINEW_EFORMAT, "%s: expected 16 numbers (a 4x4 matrix), found %d",
                           path, n);
    for (int i = 0; i < 16; i++)
        if (!isfinite(m[i]))
            return sinew__fail(ctx, SINEW_EVALUE, "%s: entry %d is not finite", path, i + 1);
    if (m[12] != 0 || m[13] != 0 || m[14] != 0 || m[15] != 1)
        return sinew__fail(ctx, SINEW_EVALUE, "%s: last row must be 0 0 0 1", path);
    sinew_rigid o;
    for (int i = 0; i < 3; i++) {
        for (int j = 0; j < 3; j++)
            o.R[3 * i + j] = m[4 * i + j];
        o.t[i] = m[4 * i + 3];
    }
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            double d = 0;
            for (int k = 0; k < 3; k++)
                d += o.R[3 * k + i] * o.R[3 * k + j];
            if (fabs(d - (i == j)) > 1e-3)
                return sinew__fail(ctx, SINEW_EVALUE, "%s: rotation part is not orthonormal", path);
        }
    *T = o;
    return SINEW_OK;
}

/* ---- weighted rigid fit ---- */

/* SVD of a 3x3 matrix A = U diag(s) V^T by one-sided Jacobi rotations, singular values
 * sorted in decreasing order. U columns for zero singular values are completed to an
 * orthonormal basis. */
static void svd3(const double A[9], double U[9], double s[3], double V[9])
{
    double a[9];
    memcpy(a, A, sizeof a);
    for (int i = 0; i < 9; i++)
        V[i] = (i % 4 == 0);
    for (int sweep = 0; sweep < 60; sweep++) {
        double off = 0;
        for (int pp = 0; pp < 2; pp++)
            for (int q = pp + 1; q < 3; q++) {
                double al = 0, be = 0, ga = 0;
                for (int k = 0; k < 3; k++) {
                    al += a[3 * k + pp] * a[3 * k + pp];
                    be += a[3 * k + q] * a[3 * k + q];
                    ga += a[3 * k + pp] * a[3 * k + q];
                }
                if (ga == 0 || fabs(ga) <= 1e-15 * sqrt(al * be))
                    continue;
                off += fabs(ga) / sqrt(al * be);
                double zeta = (be - al) / (2 * ga);
                double t = (zeta >= 0 ? 1.0 : -1.0) / (fabs(zeta) + sqrt(1 + zeta * zeta));
                double c = 1 / sqrt(1 + t * t), sn = c * t;
                for (int k = 0; k < 3; k++) {
                    double x = a[3 * k + pp], y = a[3 * k + q];
                    a[3 * k + pp] = c * x - sn * y;
                    a[3 * k + q] = sn * x + c * y;
                    x = V[3 * k + pp];
                    y = V[3 * k + q];
                    V[3 * k + pp] = c * x - sn * y;
                    V[3 * k + q] = sn * x + c * y;
                }
            }
        if (off < 1e-15)
            break;
    }
    for (int j = 0; j < 3; j++)
        s[j] = sqrt(a[j] * a[j] + a[3 + j] * a[3 + j] + a[6 + j] * a[6 + j]);
    /* sort columns by decreasing singular value */
    for (int i = 0; i < 2; i++)
        for (int j = i + 1; j < 3; j++)
            if (s[j] > s[i]) {
                double t = s[i];
                s[i] = s[j];
                s[j] = t;
                for (int k = 0; k < 3; k++) {
                    t = a[3 * k + i];
                    a[3 * k + i] = a[3 * k + j];
                    a[3 * k + j] = t;
                    t = V[3 * k + i];
                    V[3 * k + i] = V[3 * k + j];
                    V[3 * k + j] = t;
                }
            }
    double tol = 1e-12 * (s[0] > 0 ? s[0] : 1);
    for (int j = 0; j < 3; j++) {
        if (s[j] > tol) {
            for (int k = 0; k < 3; k++)
                U[3 * k + j] = a[3 * k + j] / s[j];
        } else if (j == 2) {
            /* third column: cross product of the first two */
            U[2] = U[3] * U[7] - U[6] * U[4];
            U[5] = U[6] * U[1] - U[0] * U[7];
            U[8] = U[0] * U[4] - U[3] * U[1];
        } else {
            for (int k = 0; k < 3; k++)
                U[3 * k + j] = 0; /* degenerate: caller refuses */
        }
    }
}

static double det3(const double M[9])
{
    return M[0] * (M[4] * M[8] - M[5] * M[7]) - M[1] * (M[3] * M[8] - M[5] * M[6]) +
           M[2] * (M[3] * M[7] - M[4] * M[6]);
}

int sinew_rigid_fit(sinew_ctx *ctx, sinew_rigid *T, double *rms, const float *src, const float *dst,
                    const float *weight, size_t n, size_t stride)
{
    if (!ctx || !src || !dst || !T || stride < 1)
        return SINEW_EINVAL;
    double W = 0, cs[3] = {0, 0, 0}, cd[3] = {0, 0, 0};
    size_t used = 0;
    for (size_t i = 0; i < n; i++) {
        const float *a = src + i * stride, *b = dst + i * stride;
        double w = weight ? weight[i * stride] : 1.0;
        if (!isfinite(w) || w < 0)
            return sinew__fail(ctx, SINEW_EVALUE, "rigid fit: weight %zu is negative or not finite",
                               i);
        if (w == 0)
            continue;
        for (int k = 0; k < 3; k++)
            if (!isfinite(a[k]) || !isfinite(b[k]))
                return sinew__fail(ctx, SINEW_EVALUE, "rigid fit: point %zu is not finite", i);
        W += w;
        used++;
        for (int k = 0; k < 3; k++) {
            cs[k] += w * a[k];
            cd[k] += w * b[k];
        }
    }
    if (used < 3 || !(W > 0))
        return sinew__fail(ctx, SINEW_EVALUE, "rigid fit: needs at least 3 weighted points");
    for (int k = 0; k < 3; k++) {
        cs[k] /= W;
        cd[k] /= W;
    }
    /* H = sum w (src - cs)(dst - cd)^T */
    double H[9] = {0};
    for (size_t i = 0; i < n; i++) {
        const float *a = src + i * stride, *b = dst + i * stride;
        double w = weight ? weight[i * stride] : 1.0;
        if (w == 0)
            continue;
        double p[3] = {a[0] - cs[0], a[1] - cs[1], a[2] - cs[2]};
        double q[3] = {b[0] - cd[0], b[1] - cd[1], b[2] - cd[2]};
        for (int r = 0; r < 3; r++)
            for (int c = 0; c < 3; c++)
                H[3 * r + c] += w * p[r] * q[c];
    }
    double U[9], s[3], V[9];
    svd3(H, U, s, V);
    if (!(s[1] > 1e-9 * s[0]) || !(s[0] > 0))
        return sinew__fail(ctx, SINEW_EVALUE, "rigid fit: points are collinear or coincident");
    /* R = V diag(1, 1, d) U^T with d = sign(det(V U^T)) */
    double d = det3(V) * det3(U) < 0 ? -1.0 : 1.0;
    sinew_rigid o;
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++)
            o.R[3 * r + c] =
                V[3 * r] * U[3 * c] + V[3 * r + 1] * U[3 * c + 1] + d * V[3 * r + 2] * U[3 * c + 2];
    for (int r = 0; r < 3; r++)
        o.t[r] = cd[r] - (o.R[3 * r] * cs[0] + o.R[3 * r + 1] * cs[1] + o.R[3 * r + 2] * cs[2]);
    if (rms) {
        double e = 0;
        for (size_t i = 0; i < n; i++) {
            const float *a = src + i * stride, *b = dst + i * stride;
            double w = weight ? weight[i * stride] : 1.0;
            if (w == 0)
                continue;
            double x[3] = {a[0], a[1], a[2]}, y[3];
            sinew_rigid_apply(&o, x, y);
            e += w * ((y[0] - b[0]) * (y[0] - b[0]) + (y[1] - b[1]) * (y[1] - b[1]) +
                      (y[2] - b[2]) * (y[2] - b[2]));
        }
        *rms = sqrt(e / W);
    }
    *T = o;
    return SINEW_OK;
}

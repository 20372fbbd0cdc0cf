/* The rows a window's QP is written into (qp_rows.reduce_rows on each row as it comes), the
 * stretch's layout, the corner rows (corner_rows.corner_rows), the kernel's buffer checks and
 * its second call, corner_room (corner_rows.corner_room): part of _window_qp.c (after
 * Python.h), kept apart to keep that file short; included once, by it. The same rules as
 * there: numpy's operations in numpy's order, to the last bit.
 */
#ifndef CURVESPEED_WINDOW_ROWS_H
#define CURVESPEED_WINDOW_ROWS_H

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "_accel_bounds.h"

typedef struct {                    /* the compressed rows being written (reduce_tables) */
    const char *fixed;
    const double *values;
    const int64_t *free_number;
    int64_t *indptr, *indices;
    double *data, *lo, *up;
    int64_t r, k;
} rows_t;

/* qp_rows.reduce_rows on one canonical row of w slots */
static void emit(rows_t *o, int w, const int64_t *c, const char *pr, const double *a,
                 double lo, double up)
{
    double shift = 0.0;
    int any_free = 0;
    for (int j = 0; j < w; j++) {
        int on_fixed = pr[j] && o->fixed[c[j]];
        shift = shift + (on_fixed ? a[j] * o->values[c[j]] : 0.0);
        any_free |= pr[j] && !on_fixed;
    }
    if (!any_free || !(isfinite(lo) || isfinite(up))) return;
    for (int j = 0; j < w; j++) {
        if (pr[j] && !o->fixed[c[j]]) {
            o->indices[o->k] = o->free_number[c[j]];
            o->data[o->k] = a[j];
            o->k++;
        }
    }
    o->lo[o->r] = lo - shift;
    o->up[o->r] = up - shift;
    o->r++;
    o->indptr[o->r] = o->k;
}

typedef struct {                    /* the stretch's layout and the iterate */
    int64_t nv;
    const char *fixed;
    const double *fixed_value, *b_hat, *b_env, *time_coef, *f_first, *f_last, *d_slots;
    double ds, margin, chord_tol, b_floor;
} layout_t;

/* corner_rows.corner_rows: the given pairs of plain steps (the first step of each, in order)
 * with a free station, the blocks each has (use: 4 a pair, corner_rows.BLOCKS); by block (side
 * hi then lo; the pair's first step at the corner, then its second), segment, pair */
#define N_SEGMENTS 3
static const double SEGMENTS[N_SEGMENTS][3] = {
    {8.0, 7.0, 0.0}, {8.0 / 3.0, 5.0 / 3.0, 1.0 / 3.0}, {4.0 / 3.0, 1.0 / 3.0, 2.0 / 3.0}};

static int corner_rows(const layout_t *L, double J, const double *cap_hi, const double *cap_lo,
                       const int64_t *pair_first, const char *use, int64_t n_pairs, rows_t *o)
{
    int64_t nv = L->nv;
    double *root = malloc((size_t)nv * sizeof(double));
    double *half = malloc(((size_t)n_pairs * 12 + 1) * sizeof(double)); /* [pair][step][s, C] */
    char *keep = malloc((size_t)n_pairs + 1);
    if (!root || !half || !keep) {
        free(root); free(half); free(keep);
        return -1;
    }
    for (int64_t k = 0; k < nv; k++)
        root[k] = L->fixed[k] ? sqrt(np_max(L->fixed_value[k], 0.0))
                              : sqrt(np_max(L->b_hat[k], L->b_floor));
    double h = 1.0 / (2.0 * L->ds);
    for (int64_t q = 0; q < n_pairs; q++) {
        int64_t i = pair_first[q];
        keep[q] = !(L->fixed[i] && L->fixed[i + 1] && L->fixed[i + 2]);
        if (!keep[q]) continue;
        for (int st = 0; st < 2; st++) {      /* H = C + s . b of each step (corner_rows.py) */
            int64_t fr = i + st, to = i + st + 1;
            double w_hat = root[fr] + root[to];
            if (!(w_hat > 0.0)) w_hat = 1.0;
            double coef = J * L->ds / (w_hat * w_hat);
            double s0 = L->fixed[fr] ? 0.0 : -coef / (2.0 * root[fr]);
            double s1 = L->fixed[to] ? 0.0 : -coef / (2.0 * root[to]);
            double b0 = L->fixed[fr] ? L->fixed_value[fr] : L->b_hat[fr];
            double b1 = L->fixed[to] ? L->fixed_value[to] : L->b_hat[to];
            double *hs = half + 12 * q + 4 * st;
            hs[0] = hs[1] = hs[2] = 0.0;
            hs[st] = s0;
            hs[st + 1] = s1;
            hs[3] = J * L->ds / w_hat - s0 * b0 - s1 * b1;
        }
    }
    const double mean_a[2][3] = {{-h, h, 0.0}, {0.0, -h, h}};
    const double *caps[2] = {cap_hi, cap_lo}, signs[2] = {1.0, -1.0};
    for (int side = 0; side < 2; side++) {
        for (int c = 0; c < 2; c++) {
            int n = 1 - c, block = 2 * side + c;    /* corner_rows.BLOCKS */
            for (int seg = 0; seg < N_SEGMENTS; seg++) {
                double alpha = SEGMENTS[seg][0], beta = SEGMENTS[seg][1];
                double gamma = SEGMENTS[seg][2];
                for (int64_t q = 0; q < n_pairs; q++) {
                    if (!keep[q] || !use[4 * q + block]) continue;
                    int64_t i = pair_first[q];
                    const double *cv = caps[side];     /* the pair's: the largest of its nodes' */
                    double cap = np_max(np_max(cv[i], cv[i + 1]), cv[i + 2]);
                    if (!isfinite(cap)) continue;
                    cap = cap * (1.0 - L->margin);
                    const double *sc = half + 12 * q + 4 * c, *sn = half + 12 * q + 4 * n;
                    int64_t cols[3] = {i, i + 1, i + 2};
                    char pr[3];
                    double vals[3];
                    for (int j = 0; j < 3; j++) {
                        vals[j] = signs[side] * (alpha * mean_a[c][j] - mean_a[n][j]) - sn[j]
                                  - gamma * sc[j];
                        pr[j] = vals[j] != 0.0;
                    }
                    emit(o, 3, cols, pr, vals, -INFINITY, beta * cap + sn[3] + gamma * sc[3]);
                }
            }
        }
    }
    free(root); free(half); free(keep);
    return 0;
}

/* An array of at least (outputs) or exactly (inputs) `items` entries of kind 'q' (int64),
 * 'd' (double) or '?' (bool). */
static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, char kind)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) != 0) return -1;
    Py_ssize_t size = kind == '?' ? 1 : 8;
    const char *f = v->format;
    int fmt_ok = kind == '?' ? strcmp(f, "?") == 0
               : kind == 'q' ? (strcmp(f, "q") == 0 || (strcmp(f, "l") == 0 && sizeof(long) == 8))
               : strcmp(f, "d") == 0;
    int len_ok = writable ? v->len >= items * size : v->len == items * size;
    if (!fmt_ok || v->itemsize != size || !len_ok) {
        PyErr_SetString(PyExc_ValueError, "window_qp kernel: an array has the wrong type or "
                        "length");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}


/* corner_rows.corner_room on an open stretch (steps k -> k + 1), for the pairs starting at
 * pair_first, under the nodes' caps (drive, braking): room[4 q + block] and scale[q], numpy's
 * operations in its order */
static PyObject *py_corner_room(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[6];
    double J, ds;
    if (!PyArg_ParseTuple(args, "OOOOOO(dd)", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &J, &ds))
        return NULL;
    Py_buffer probe;
    if (PyObject_GetBuffer(o[0], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t nv = probe.len / 8;
    PyBuffer_Release(&probe);
    if (PyObject_GetBuffer(o[1], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t m = probe.len / 8;
    PyBuffer_Release(&probe);
    const Py_ssize_t items[6] = {nv, m, nv, nv, 4 * m, m};
    const char kinds[6] = {'d', 'q', 'd', 'd', 'd', 'd'};
    Py_buffer v[6];
    int got;
    PyObject *result = NULL;
    for (got = 0; got < 6; got++)
        if (get(o[got], &v[got], got >= 4, items[got], kinds[got]) != 0) goto done;
    {
        const double *b = v[0].buf;
        const int64_t *first = v[1].buf;
        const double *caps[2] = {v[2].buf, v[3].buf};
        double *room = v[4].buf, *scale = v[5].buf;
        for (Py_ssize_t q = 0; q < m; q++) {
            if (first[q] < 0 || first[q] + 2 >= nv) {
                PyErr_SetString(PyExc_ValueError, "window_qp kernel: a pair out of range");
                goto done;
            }
        }
        const double signs[2] = {1.0, -1.0};
        for (Py_ssize_t q = 0; q < m; q++) {
            int64_t k = first[q];
            double v0 = sqrt(np_max(b[k], 0.0)), v1 = sqrt(np_max(b[k + 1], 0.0));
            double v2 = sqrt(np_max(b[k + 2], 0.0));
            double a[2] = {(b[k + 1] - b[k]) * (0.5 / ds), (b[k + 2] - b[k + 1]) * (0.5 / ds)};
            double h[2] = {J * ds / np_max(v0 + v1, 1e-12), J * ds / np_max(v1 + v2, 1e-12)};
            for (int side = 0; side < 2; side++) {
                const double *cv = caps[side];
                double cap = np_max(np_max(cv[k], cv[k + 1]), cv[k + 2]);
                for (int c = 0; c < 2; c++) {
                    double r = INFINITY, sign = signs[side];
                    if (isfinite(cap)) {
                        double d = cap - sign * a[c], drop = sign * (a[c] - a[1 - c]);
                        for (int seg = 0; seg < N_SEGMENTS; seg++)
                            r = np_min(r, SEGMENTS[seg][1] * d + SEGMENTS[seg][2] * h[c]
                                          + h[1 - c] - drop);
                    }
                    room[4 * q + 2 * side + c] = r;
                }
            }
            scale[q] = np_min(h[0], h[1]);
        }
        result = Py_NewRef(Py_None);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

#endif

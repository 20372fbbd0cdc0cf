/* One sequential-convex iteration's QP assembled in one call, for an open stretch without power,
 * lateral jerk bound or comfort term (a receding-horizon window's QP): the twin of
 * convex_qp.QPBuilder.reduced (rows, _accel_rows with _chords, _jerk_rows, _end_reserve_rows,
 * objective with qp_time.time_model and tridiagonal_hessian, qp_rows.canonical and
 * reduce_tables), which stays as the reference the tests compare against. The same operations
 * in the same order, so the numbers agree to the last bit (built with -ffp-contract=off; sums
 * from zero as numpy's bincount and np.add.at take them, Python's sum from the integer 0;
 * numpy's maximum and minimum propagate NaN, its ** 2 is a product, the median of an even
 * count the mean of the middle two).
 *
 * Rows come out as the reference has them: bounds, acceleration chords (ends, sides, segments,
 * steps), jerk rows (all + rows, then all -), corner rows (_window_rows.h), the end reserve;
 * the fixed stations eliminated into the sides and rows with no free station dropped. Only the
 * buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "_accel_bounds.h"

typedef struct { double slope[2], rhs[2]; char ok[2]; } chord_t;

/* QPBuilder._chords at one node: the two segments and the node's tolerance */
static double chords(double f0, double fm, double fe, double m, double e, double margin,
                     double chord_tol, chord_t *ch)
{
    const double p0 = 0.0;
    double a_tol = margin * np_max(np_max(fabs(f0), fabs(fm)), fabs(fe));
    int wide = e - p0 > 1e-12;
    double whole = wide ? (fe - f0) / (e - p0) : 0.0;
    double dev = fabs(fm - (f0 + whole * (m - p0)));
    int single = dev <= chord_tol;
    const double p1s[2] = {p0, m}, p2s[2] = {m, e}, f1s[2] = {f0, fm}, f2s[2] = {fm, fe};
    for (int seg = 0; seg < 2; seg++) {
        double width = p2s[seg] - p1s[seg];
        int ok = width > 1e-12;
        double slope = ok ? (f2s[seg] - f1s[seg]) / width : 0.0;
        double rhs = f1s[seg] - slope * p1s[seg];
        if (seg == 0) {
            if (single) {
                slope = whole;
                rhs = f0 - whole * p0;
            }
            ok = ok || single;
        } else {
            ok = ok && !single;
        }
        ch->slope[seg] = slope;
        ch->rhs[seg] = rhs;
        ch->ok[seg] = (char)ok;
    }
    return a_tol;
}

#include "_window_rows.h"

/* qp_rows.canonical on one row of three slots with two value columns: a stable sort by
 * station, slots naming the station before them summed into the first of their run */
static void canonical3(int64_t *c, char *pr, double *d, double *g)
{
    for (int i = 1; i < 3; i++) {
        for (int j = i; j > 0 && c[j] < c[j - 1]; j--) {
            int64_t tc = c[j]; c[j] = c[j - 1]; c[j - 1] = tc;
            double td = d[j]; d[j] = d[j - 1]; d[j - 1] = td;
            double tg = g[j]; g[j] = g[j - 1]; g[j - 1] = tg;
        }
    }
    int target = 0;
    for (int j = 1; j < 3; j++) {
        if (pr[j] && c[j] == c[j - 1]) {
            d[target] += d[j];
            d[j] = 0.0;
            g[target] += g[j];
            g[j] = 0.0;
            pr[j] = 0;
        } else {
            target = j;
        }
    }
}

/* QPBuilder._accel_rows (no power): every chord at both nodes of each step with a free node,
 * in the reference's order; per node first (each chord belongs to a node) */
static int accel_rows(const layout_t *L, const phys_t *p, rows_t *o)
{
    int64_t nv = L->nv;
    chord_t *ch = malloc(2 * (size_t)nv * sizeof(chord_t));     /* [node][hi, lo] */
    double *a_tol = malloc(2 * (size_t)nv * sizeof(double));
    if (!ch || !a_tol) {
        free(ch);
        free(a_tol);
        return -1;
    }
    for (int64_t k = 0; k < nv; k++) {
        double e = L->b_env[k], bh = L->b_hat[k];
        double m = np_min(np_max(bh, 0.02 * e), 0.995 * e);
        if (e - bh < 1e-9 * np_max(e, 1.0)) m = 0.5 * e;
        double lo0, hi0, lom, him, loe, hie;
        accel_bounds(p, k, 0.0, &lo0, &hi0);
        accel_bounds(p, k, m, &lom, &him);
        accel_bounds(p, k, e, &loe, &hie);
        a_tol[2 * k] = chords(hi0, him, hie, m, e, L->margin, L->chord_tol, &ch[2 * k]);
        a_tol[2 * k + 1] = chords(lo0, lom, loe, m, e, L->margin, L->chord_tol, &ch[2 * k + 1]);
    }
    double h = 1.0 / (2.0 * L->ds);
    for (int end = 0; end < 2; end++) {
        for (int side = 0; side < 2; side++) {
            for (int seg = 0; seg < 2; seg++) {
                for (int64_t s = 0; s + 1 < nv; s++) {
                    if (L->fixed[s] && L->fixed[s + 1]) continue;
                    int64_t node = end == 0 ? s : s + 1;
                    const chord_t *c = &ch[2 * node + side];
                    double slope = c->slope[seg], rhs = c->rhs[seg];
                    int ok = c->ok[seg];
                    double fh0 = L->f_first[s] * h, c_from, c_to;
                    if (end == 0) {
                        c_from = -fh0 - slope;
                        c_to = fh0;
                    } else {            /* the same row at the step's first node: none again */
                        double fh = L->f_last[s] * h;
                        c_from = -fh;
                        c_to = fh - slope;
                        const chord_t *pc = &ch[2 * s + side];
                        double p_from = -fh0 - pc->slope[seg], p_to = fh0;
                        ok = ok && !(p_from == c_from && p_to == c_to && pc->rhs[seg] == rhs);
                    }
                    if (!ok) continue;
                    double tol = a_tol[2 * node + side];
                    int64_t cols[2] = {s, s + 1};
                    const char pr[2] = {1, 1};
                    double vals[2] = {c_from, c_to};
                    if (side == 0) emit(o, 2, cols, pr, vals, -INFINITY, rhs - tol);
                    else emit(o, 2, cols, pr, vals, rhs + tol, INFINITY);
                }
            }
        }
    }
    free(ch);
    free(a_tol);
    return 0;
}

typedef struct {                    /* the jerk's time-base terms and the start's acceleration */
    int64_t count;
    const int64_t *node, *prev, *next;
    const double *weights, *scale;
    double J, a0, a_tol;
} terms_t;

/* QPBuilder._jerk_rows: the terms with a free station, + rows then - rows */
static int jerk_rows(const layout_t *L, const terms_t *t, rows_t *o)
{
    int64_t nv = L->nv, nt = t->count;
    double *root = malloc((size_t)nv * sizeof(double));
    double *row = malloc((size_t)nt * 7 * sizeof(double));      /* d[3], g[3], rhs */
    int64_t *cols = malloc((size_t)nt * 3 * sizeof(int64_t));
    char *pr = malloc((size_t)nt * 3);
    char *keep = malloc((size_t)nt);
    if (!root || !row || !cols || !pr || !keep) {
        free(root); free(row); free(cols); free(pr); free(keep);
        return -1;
    }
    for (int64_t k = 0; k < nv; k++)
        root[k] = L->fixed[k] ? sqrt(np_max(L->fixed_value[k], 0.0))
                              : sqrt(np_max(L->b_hat[k], L->b_floor));
    for (int64_t i = 0; i < nt; i++) {
        const int64_t c[3] = {t->prev[i], t->node[i], t->next[i]};
        keep[i] = !(L->fixed[c[0]] && L->fixed[c[1]] && L->fixed[c[2]]);
        if (!keep[i]) continue;
        const double *w = t->weights + 3 * i;
        double w_hat = 0.0;
        for (int j = 0; j < 3; j++) w_hat = w_hat + w[j] * root[c[j]];
        if (!(w_hat > 0.0)) w_hat = 1.0;
        double sj = t->scale[i] * t->J * L->ds;
        double coef = sj / (w_hat * w_hat);
        double *d = row + 7 * i, *g = d + 3, tangent = 0.0;
        for (int j = 0; j < 3; j++) {
            int exact = L->fixed[c[j]] || w[j] == 0.0;
            g[j] = exact ? 0.0 : coef * w[j] / (2.0 * root[c[j]]);
            double base = L->fixed[c[j]] ? L->fixed_value[c[j]] : L->b_hat[c[j]];
            tangent = tangent + g[j] * base;
            d[j] = L->d_slots[3 * c[1] + j];
            cols[3 * i + j] = c[j];
            pr[3 * i + j] = 1;
        }
        d[6] = sj / w_hat + tangent;
        canonical3(cols + 3 * i, pr + 3 * i, d, g);
    }
    for (int sign = 0; sign < 2; sign++) {
        for (int64_t i = 0; i < nt; i++) {
            if (!keep[i]) continue;
            const double *d = row + 7 * i, *g = d + 3;
            int first = t->node[i] == 0;
            double shift = first ? t->a0 : 0.0, slack = first ? t->a_tol : 0.0;
            double vals[3];
            char present[3];
            for (int j = 0; j < 3; j++) {
                vals[j] = sign == 0 ? d[j] + g[j] : -d[j] + g[j];
                present[j] = pr[3 * i + j] && vals[j] != 0.0;
            }
            double up = sign == 0 ? d[6] + shift + slack : d[6] - shift + slack;
            emit(o, 3, cols + 3 * i, present, vals, -INFINITY, up);
        }
    }
    free(root); free(row); free(cols); free(pr); free(keep);
    return 0;
}

/* QPBuilder._end_reserve_rows: b_N + c a_end <= brake_b (1 - margin) - d for each (c, d) */
static void reserve_rows(const layout_t *L, const double *cd, int64_t count, double brake_b,
                         rows_t *o)
{
    int64_t nv = L->nv;
    double h = L->f_last[nv - 2] / (2.0 * L->ds);
    for (int64_t i = 0; i < count; i++) {
        double c = cd[2 * i], d = cd[2 * i + 1];
        int64_t cols[2] = {nv - 2, nv - 1};
        const char pr[2] = {1, 1};
        double vals[2] = {-c * h, 1.0 + c * h};
        emit(o, 2, cols, pr, vals, -INFINITY, brake_b * (1.0 - L->margin) - d);
    }
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

typedef struct {                    /* the objective's entries over the free stations */
    int64_t *prow, *pcol;
    double *pval, *q;
    int64_t count;
    double scale;
} objective_t;

/* QPBuilder.objective without a comfort term on an open stretch: qp_time.time_model over the
 * steps with a free node, tridiagonal_hessian, the linear term and the scale */
static int objective(const layout_t *L, const int64_t *free_number, objective_t *out)
{
    int64_t nv = L->nv;
    double *grad = calloc((size_t)nv, sizeof(double)), *diag = calloc((size_t)nv, sizeof(double));
    double *off = calloc((size_t)nv, sizeof(double)), *gy = calloc((size_t)nv, sizeof(double));
    double *hyy = calloc((size_t)nv, sizeof(double)), *absg = malloc((size_t)nv * sizeof(double));
    if (!grad || !diag || !off || !gy || !hyy || !absg) {
        free(grad); free(diag); free(off); free(gy); free(hyy); free(absg);
        return -1;
    }
    const char *fixed = L->fixed;
    const double rf = sqrt(L->b_floor);
    for (int64_t s = 0; s + 1 < nv; s++) {
        if (fixed[s] && fixed[s + 1]) continue;
        int fx = !fixed[s], fy = !fixed[s + 1];
        double sx = sqrt(np_max(L->b_hat[s], 0.0)), sy = sqrt(np_max(L->b_hat[s + 1], 0.0));
        double sxf = fx ? np_max(sx, rf) : sx, syf = fy ? np_max(sy, rf) : sy;
        double S = sxf + syf;
        double cds = 0.5 * L->time_coef[s] * L->ds;
        sxf = np_max(sxf, rf);
        syf = np_max(syf, rf);
        double S2 = S * S, S3 = S * S * S;
        grad[s] = grad[s] + (fx ? -cds / (S2 * sxf) : 0.0);
        gy[s] = fy ? -cds / (S2 * syf) : 0.0;
        diag[s] = diag[s] + (fx ? cds * (1.0 / (S3 * (sxf * sxf))
                                         + 0.5 / (S2 * (sxf * sxf * sxf))) : 0.0);
        hyy[s] = fy ? cds * (1.0 / (S3 * (syf * syf)) + 0.5 / (S2 * (syf * syf * syf))) : 0.0;
        off[s] = fx && fy ? cds / (S3 * sxf * syf) : 0.0;
    }
    for (int64_t s = 0; s + 1 < nv; s++) {      /* np.add.at: the steps' first nodes, then last */
        if (fixed[s] && fixed[s + 1]) continue;
        grad[s + 1] = grad[s + 1] + gy[s];
        diag[s + 1] = diag[s + 1] + hyy[s];
    }
    int64_t count = 0, n_free = 0;
    for (int64_t k = 0; k < nv; k++) {
        const int64_t cols[3] = {k - 1, k, k + 1};
        const double vals[3] = {k > 0 ? off[k - 1] : 0.0, diag[k], k + 1 < nv ? off[k] : 0.0};
        double hb = 0.0;
        for (int j = 0; j < 3; j++) {
            int64_t c = cols[j];
            if (c < 0 || c >= nv || fixed[k] || fixed[c] || vals[j] == 0.0) continue;
            out->prow[count] = free_number[k];
            out->pcol[count] = free_number[c];
            out->pval[count] = vals[j];
            hb = hb + vals[j] * L->b_hat[c];
            count++;
        }
        if (!fixed[k]) {
            out->q[n_free] = grad[k] - hb;
            absg[n_free++] = fabs(grad[k]);
        }
    }
    double median = 1.0;
    if (n_free > 0) {
        qsort(absg, (size_t)n_free, sizeof(double), cmp_double);
        median = n_free % 2 ? absg[n_free / 2] : (absg[n_free / 2 - 1] + absg[n_free / 2]) / 2.0;
    }
    double scale = 1.0 / (1e-12 > median ? 1e-12 : median);   /* Python's max(median, 1e-12) */
    for (int64_t i = 0; i < count; i++) out->pval[i] = out->pval[i] * scale;
    for (int64_t i = 0; i < n_free; i++) out->q[i] = out->q[i] * scale;
    out->count = count;
    out->scale = scale;
    free(grad); free(diag); free(off); free(gy); free(hyy); free(absg);
    return 0;
}

/* qp_rows.interval_blocks on the rows written and the objective's entries: the first free
 * station of every independent block and one past the last; returns how many are written */
static int64_t interval_blocks(const rows_t *o, const objective_t *obj, int64_t n,
                               int64_t *starts)
{
    int64_t *cover = calloc((size_t)n + 1, sizeof(int64_t));
    if (!cover) return -1;
    for (int64_t r = 0; r < o->r; r++) {
        int64_t first = n, last = -1;
        for (int64_t k = o->indptr[r]; k < o->indptr[r + 1]; k++) {
            if (o->data[k] == 0.0) continue;
            if (o->indices[k] < first) first = o->indices[k];
            if (o->indices[k] > last) last = o->indices[k];
        }
        if (last > first) {
            cover[first]++;
            cover[last]--;
        }
    }
    for (int64_t i = 0; i < obj->count; i++) {
        if (obj->pval[i] != 0.0 && obj->prow[i] < obj->pcol[i]) {
            cover[obj->prow[i]]++;
            cover[obj->pcol[i]]--;
        }
    }
    int64_t count = 0, running = 0;
    starts[count++] = 0;
    for (int64_t c = 0; c + 1 < n; c++) {
        running += cover[c];
        if (running <= 0) starts[count++] = c + 1;     /* c not linked to c + 1 */
    }
    starts[count++] = n;
    free(cover);
    return count;
}

#define N_ARRAYS 35

/* assemble(kappa_abs, cos_bank, sin_bank, cos_grade, sin_grade, mu_long, mu_lat, fixed,
 *          fixed_value, b_hat, b_env, time_coef, f_first, f_last, d_slots, t_node, t_prev,
 *          t_next, t_weights, t_scale, reserve, indptr, indices, data, lo, up, prow, pcol,
 *          pval, q, starts, corner_first, corner_use, corner_hi, corner_lo, scalars) -> (rows,
 *          entries, objective
 *          entries, scale, blocks + 1) (starts: qp_rows.interval_blocks of the QP written;
 *          corner_first: the first step of each pair that gets corner rows, increasing;
 *          corner_use: which of its four blocks; corner_hi, corner_lo: each node's caps,
 *          corner_rows.corner_caps) */
static PyObject *py_assemble(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[N_ARRAYS];
    double s[14];
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOOOOOOOOOOOOOOOOOOOOOOOOO(dddddddddddddd)",
                          &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &o[6], &o[7], &o[8], &o[9],
                          &o[10], &o[11], &o[12], &o[13], &o[14], &o[15], &o[16], &o[17],
                          &o[18], &o[19], &o[20], &o[21], &o[22], &o[23], &o[24], &o[25],
                          &o[26], &o[27], &o[28], &o[29], &o[30], &o[31], &o[32], &o[33], &o[34],
                          &s[0], &s[1], &s[2], &s[3], &s[4], &s[5], &s[6], &s[7], &s[8], &s[9],
                          &s[10], &s[11], &s[12], &s[13]))
        return NULL;
    Py_buffer probe;
    if (PyObject_GetBuffer(o[0], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t nv = probe.len / 8;
    PyBuffer_Release(&probe);
    if (PyObject_GetBuffer(o[15], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t nt = probe.len / 8;
    PyBuffer_Release(&probe);
    if (PyObject_GetBuffer(o[20], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t nr = probe.len / 16;
    PyBuffer_Release(&probe);
    if (PyObject_GetBuffer(o[31], &probe, PyBUF_C_CONTIGUOUS) != 0) return NULL;
    Py_ssize_t nc = probe.len / 8;
    PyBuffer_Release(&probe);
    if (nv < 2) {
        PyErr_SetString(PyExc_ValueError, "window_qp kernel: fewer than two stations");
        return NULL;
    }
    Py_ssize_t rows = nv + 8 * (nv - 1) + 2 * nt + nr + 4 * N_SEGMENTS * nc;
    Py_ssize_t nnz = nv + 16 * (nv - 1) + 6 * nt + 2 * nr + 12 * N_SEGMENTS * nc;
    const Py_ssize_t items[N_ARRAYS] = {
        nv, nv, nv, nv, nv, nv, nv, nv, nv, nv, nv, nv - 1, nv - 1, nv - 1, 3 * nv,
        nt, nt, nt, 3 * nt, nt, 2 * nr, rows + 1, nnz, nnz, rows, rows, 3 * nv, 3 * nv, 3 * nv,
        nv, nv + 1, nc, 4 * nc, nv, nv};
    const char kinds[N_ARRAYS] = {'d', 'd', 'd', 'd', 'd', 'd', 'd', '?', 'd', 'd', 'd', 'd',
                                  'd', 'd', 'd', 'q', 'q', 'q', 'd', 'd', 'd', 'q', 'q', 'd',
                                  'd', 'd', 'q', 'q', 'd', 'd', 'q', 'q', '?', 'd', 'd'};
    Py_buffer v[N_ARRAYS];
    int got;
    PyObject *result = NULL;
    for (got = 0; got < N_ARRAYS; got++)
        if (get(o[got], &v[got], got >= 21 && got < 31, items[got], kinds[got]) != 0)
            goto done;
    {
        const int64_t *tn = v[15].buf, *tp = v[16].buf, *tx = v[17].buf;
        for (Py_ssize_t i = 0; i < nt; i++) {
            if (tn[i] < 0 || tn[i] >= nv || tp[i] < 0 || tp[i] >= nv || tx[i] < 0 || tx[i] >= nv) {
                PyErr_SetString(PyExc_ValueError, "window_qp kernel: a station out of range");
                goto done;
            }
        }
        const int64_t *cf = v[31].buf;
        for (Py_ssize_t i = 0; i < nc; i++) {
            if (cf[i] < 0 || cf[i] + 2 >= nv) {
                PyErr_SetString(PyExc_ValueError, "window_qp kernel: a pair out of range");
                goto done;
            }
        }
        phys_t p = {v[0].buf, v[1].buf, v[2].buf, v[3].buf, v[4].buf, v[5].buf, v[6].buf,
                    s[0], s[1], s[2], s[3], s[4], s[5]};
        layout_t L = {nv, v[7].buf, v[8].buf, v[9].buf, v[10].buf, v[11].buf, v[12].buf,
                      v[13].buf, v[14].buf, s[6], s[7], s[8], s[9]};
        terms_t t = {nt, tn, tp, tx, v[18].buf, v[19].buf, s[10] * (1.0 - s[7]), s[11], s[12]};
        int64_t *free_number = malloc((size_t)nv * sizeof(int64_t));
        if (!free_number) {
            PyErr_NoMemory();
            goto done;
        }
        int64_t count = 0;
        for (Py_ssize_t k = 0; k < nv; k++) {
            count += !L.fixed[k];
            free_number[k] = count - 1;
        }
        rows_t out = {L.fixed, L.fixed_value, free_number, v[21].buf, v[22].buf, v[23].buf,
                      v[24].buf, v[25].buf, 0, 0};
        out.indptr[0] = 0;
        for (Py_ssize_t k = 0; k < nv; k++) {           /* the bounds 0 <= b <= b_env */
            int64_t col = k;
            const char pr = 1;
            const double one = 1.0;
            double val = L.fixed[k] ? L.fixed_value[k] : 0.0;
            emit(&out, 1, &col, &pr, &one, val, L.fixed[k] ? val : L.b_env[k]);
        }
        objective_t obj = {v[26].buf, v[27].buf, v[28].buf, v[29].buf, 0, 1.0};
        int bad = accel_rows(&L, &p, &out) != 0 || jerk_rows(&L, &t, &out) != 0
                  || corner_rows(&L, t.J, v[33].buf, v[34].buf, cf, v[32].buf, nc, &out) != 0;
        if (!bad && nr > 0) reserve_rows(&L, v[20].buf, nr, s[13], &out);
        bad = bad || objective(&L, free_number, &obj) != 0;
        int64_t n_free = free_number[nv - 1] + 1;
        free(free_number);
        int64_t n_starts = bad ? -1 : interval_blocks(&out, &obj, n_free, v[30].buf);
        if (bad || n_starts < 0) {
            PyErr_NoMemory();
            goto done;
        }
        result = Py_BuildValue("LLLdL", (long long)out.r, (long long)out.k,
                               (long long)obj.count, obj.scale, (long long)n_starts);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

static PyMethodDef methods[] = {
    {"assemble", py_assemble, METH_VARARGS,
     "assemble(...) -> (rows, entries, objective entries, scale, block starts): the reduced "
     "QP of one iteration on an open stretch (convex_qp.QPBuilder.reduced) and its blocks "
     "(qp_rows.interval_blocks)."},
    {"corner_room", py_corner_room, METH_VARARGS,
     "corner_room(b, pair_first, cap_hi, cap_lo, room, scale, (J, ds)): "
     "corner_rows.corner_room on an open stretch."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_window_qp", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__window_qp(void) { return PyModule_Create(&module); }

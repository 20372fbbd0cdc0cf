/* Compiled passes over the convex solver's QP rows, each the twin of numpy code that stays as
 * the reference the tests compare against (the same operations in the same order, so the numbers
 * agree to the last bit; built with -ffp-contract=off, no fused multiply-adds):
 *
 * - reduce_into: qp_rows.reduce_rows, the fixed stations eliminated from a canonical row table
 *   and the free stations' rows written as compressed rows. A row's shift sums, slot by slot
 *   from zero, the fixed stations' terms (0.0 added where a slot holds none, as numpy's where
 *   does). The rows are written straight after those of the tables before (one set of
 *   compressed rows for the whole QP, no joining afterwards).
 * - scale_rows: the rows' part of banded_ipm._prepare_rows (centred and scaled variables, rows
 *   at unit largest coefficient, the kind of each row's sides, the rows' bandwidth).
 * - row_products: A x and A'y as banded_ipm._judge checks the kernel's answer with them (each
 *   sum from zero in the order numpy's bincount takes the terms).
 * - take_rows: the rows of RowQP.take (a batch's rows, its variables renumbered); copies only.
 * - start_point, box_extent: banded_ipm._start's slacks and multipliers and banded_ipm.
 *   _box_extent (maxima and minima propagate NaN, as numpy's do).
 * - search_order: banded_ipm._far_order_numpy, the columns in breadth-first order from a far
 *   column of each part (a queue visits them in the order the level-by-level numpy search
 *   lists them).
 *
 * Only the buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* An array of `items` entries (at least that many for an output) of kind 'q' (int64), 'd'
 * (double), 'b' (int8) or '?' (bool). */
static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, char kind)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) != 0) return -1;
    Py_ssize_t size = (kind == '?' || kind == 'b') ? 1 : 8;
    const char *f = v->format;
    int fmt_ok = kind == '?' ? strcmp(f, "?") == 0
               : kind == 'b' ? strcmp(f, "b") == 0
               : kind == 'q' ? (strcmp(f, "q") == 0 || (strcmp(f, "l") == 0 && sizeof(long) == 8))
               : strcmp(f, "d") == 0;
    int len_ok = writable ? v->len >= items * size : v->len == items * size;
    if (!fmt_ok || v->itemsize != size || !len_ok) {
        PyErr_SetString(PyExc_ValueError, "qp_rows kernel: an array has the wrong type or "
                        "is too short");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

/* The length of o's buffer in items of `size` bytes; -1 (an exception set) without one. */
static Py_ssize_t items_in(PyObject *o, Py_ssize_t size)
{
    Py_buffer b;
    if (PyObject_GetBuffer(o, &b, PyBUF_C_CONTIGUOUS) != 0) return -1;
    Py_ssize_t n = b.len / size;
    PyBuffer_Release(&b);
    return n;
}

/* reduce_into(cols, present, vals, lo, up, fixed, values, free_number, indptr, indices, data,
 *             lo_out, up_out, row0, k0) -> (row1, k1) */
static PyObject *py_reduce_into(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[13];
    long long row0, k0;
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOOOLL", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5],
                          &o[6], &o[7], &o[8], &o[9], &o[10], &o[11], &o[12], &row0, &k0))
        return NULL;
    Py_buffer v[13];
    int got = 0;
    PyObject *result = NULL;
    /* sizes: m rows of w slots (lo's length and cols' length), nv stations (fixed's length) */
    Py_ssize_t m = items_in(o[3], 8), cells = items_in(o[0], 8), nv = items_in(o[5], 1);
    if (m < 0 || cells < 0 || nv < 0) return NULL;
    Py_ssize_t w = m > 0 ? cells / m : 0;
    if (row0 < 0 || k0 < 0 || (m == 0 ? 0 : w < 1)) {
        PyErr_SetString(PyExc_ValueError, "qp_rows kernel: bad sizes");
        return NULL;
    }
    const char kinds[13] = {'q', '?', 'd', 'd', 'd', '?', 'd', 'q', 'q', 'q', 'd', 'd', 'd'};
    const Py_ssize_t items[13] = {m * w, m * w, m * w, m, m, nv, nv, nv, row0 + m + 1,
                                  k0 + m * w, k0 + m * w, row0 + m, row0 + m};
    for (got = 0; got < 13; got++)
        if (get(o[got], &v[got], got >= 8, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *cols = v[0].buf, *free_number = v[7].buf;
        const char *present = v[1].buf, *fixed = v[5].buf;
        const double *vals = v[2].buf, *lo = v[3].buf, *up = v[4].buf, *values = v[6].buf;
        int64_t *indptr = v[8].buf, *indices = v[9].buf;
        double *data = v[10].buf, *lo_out = v[11].buf, *up_out = v[12].buf;
        for (Py_ssize_t i = 0; i < m * w; i++) {
            if (present[i] && (cols[i] < 0 || cols[i] >= nv)) {
                PyErr_SetString(PyExc_ValueError, "qp_rows kernel: a station out of range");
                goto done;
            }
        }
        int64_t r = row0, k = k0;
        indptr[r] = k;
        for (Py_ssize_t i = 0; i < m; i++) {
            const int64_t *c = cols + i * w;
            const char *pr = present + i * w;
            const double *a = vals + i * w;
            double shift = 0.0;
            int any_free = 0;
            for (Py_ssize_t j = 0; j < w; j++) {
                int on_fixed = pr[j] && fixed[c[j]];
                shift = shift + (on_fixed ? a[j] * values[c[j]] : 0.0);
                any_free |= pr[j] && !on_fixed;
            }
            if (!any_free || !(isfinite(lo[i]) || isfinite(up[i]))) continue;
            for (Py_ssize_t j = 0; j < w; j++) {
                if (pr[j] && !fixed[c[j]]) {
                    indices[k] = free_number[c[j]];
                    data[k] = a[j];
                    k++;
                }
            }
            lo_out[r] = lo[i] - shift;
            up_out[r] = up[i] - shift;
            r++;
            indptr[r] = k;
        }
        result = Py_BuildValue("LL", (long long)r, (long long)k);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* Compressed rows' sizes and order: indptr from 0, ascending, ending at nnz; indices in range. */
static int check_rows(const int64_t *indptr, const int64_t *indices, Py_ssize_t m,
                      Py_ssize_t nnz, Py_ssize_t n)
{
    if (indptr[0] != 0 || indptr[m] != nnz) goto bad;
    for (Py_ssize_t i = 0; i < m; i++)
        if (indptr[i + 1] < indptr[i]) goto bad;
    for (Py_ssize_t k = 0; k < nnz; k++)
        if (indices[k] < 0 || indices[k] >= n) goto bad;
    return 0;
bad:
    PyErr_SetString(PyExc_ValueError, "qp_rows kernel: compressed rows out of order or range");
    return -1;
}

/* scale_rows(indptr, indices, data, lo, up, centre, scale, data_out, lo_out, up_out, kind_out,
 *            centred) -> the rows' bandwidth (largest last - first column of a row) */
static PyObject *py_scale_rows(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[11];
    int centred;
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOp", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5],
                          &o[6], &o[7], &o[8], &o[9], &o[10], &centred))
        return NULL;
    /* indptr, data and centre give m, nnz and n */
    Py_ssize_t m = items_in(o[0], 8) - 1, nnz = items_in(o[2], 8), n = items_in(o[5], 8);
    if (PyErr_Occurred()) return NULL;
    if (m < 0) { PyErr_SetString(PyExc_ValueError, "qp_rows kernel: empty indptr"); return NULL; }
    const char kinds[11] = {'q', 'q', 'd', 'd', 'd', 'd', 'd', 'd', 'd', 'd', 'b'};
    const Py_ssize_t items[11] = {m + 1, nnz, nnz, m, m, n, n, nnz, m, m, m};
    Py_buffer v[11];
    int got = 0;
    PyObject *result = NULL;
    for (got = 0; got < 11; got++)
        if (get(o[got], &v[got], got >= 7, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *indptr = v[0].buf, *indices = v[1].buf;
        const double *data = v[2].buf, *lo = v[3].buf, *up = v[4].buf;
        const double *centre = v[5].buf, *scale = v[6].buf;
        double *dout = v[7].buf, *lout = v[8].buf, *uout = v[9].buf;
        int8_t *kind = v[10].buf;
        if (check_rows(indptr, indices, m, nnz, n) != 0) goto done;
        int64_t kd = 0;
        for (Py_ssize_t i = 0; i < m; i++) {
            const int64_t k0 = indptr[i], k1 = indptr[i + 1];
            double shift = 0.0, norm = 0.0, l = lo[i], u = up[i];
            for (int64_t k = k0; k < k1; k++) {
                double a = data[k];
                if (centred) {
                    shift = shift + a * centre[indices[k]];
                    a = a * scale[indices[k]];
                }
                dout[k] = a;
                double f = fabs(a);     /* numpy's maximum: a NaN wins */
                norm = (isnan(f) || isnan(norm)) ? NAN : (f > norm ? f : norm);
            }
            if (centred) { l = l - shift; u = u - shift; }
            if (norm == 0.0) norm = 1.0;
            for (int64_t k = k0; k < k1; k++) dout[k] = dout[k] / norm;
            l = l / norm;
            u = u / norm;
            lout[i] = l;
            uout[i] = u;
            int fl = isfinite(l), fu = isfinite(u);
            kind[i] = k1 == k0 ? 0 : fl && fu ? (l == u ? 4 : 3) : fl ? 1 : fu ? 2 : 0;
            if (k1 > k0 && indices[k1 - 1] - indices[k0] > kd) kd = indices[k1 - 1] - indices[k0];
        }
        result = PyLong_FromLongLong((long long)kd);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* row_products(indptr, indices, data, x, y, ax, aty): ax = A x, aty = A'y */
static PyObject *py_row_products(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[7];
    if (!PyArg_ParseTuple(args, "OOOOOOO", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &o[6]))
        return NULL;
    /* indptr, data and x give m, nnz and n */
    Py_ssize_t m = items_in(o[0], 8) - 1, nnz = items_in(o[2], 8), n = items_in(o[3], 8);
    if (PyErr_Occurred()) return NULL;
    if (m < 0) { PyErr_SetString(PyExc_ValueError, "qp_rows kernel: empty indptr"); return NULL; }
    const char kinds[7] = {'q', 'q', 'd', 'd', 'd', 'd', 'd'};
    const Py_ssize_t items[7] = {m + 1, nnz, nnz, n, m, m, n};
    Py_buffer v[7];
    int got = 0;
    PyObject *result = NULL;
    for (got = 0; got < 7; got++)
        if (get(o[got], &v[got], got >= 5, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *indptr = v[0].buf, *indices = v[1].buf;
        const double *data = v[2].buf, *x = v[3].buf, *y = v[4].buf;
        double *ax = v[5].buf, *aty = v[6].buf;
        if (check_rows(indptr, indices, m, nnz, n) != 0) goto done;
        for (Py_ssize_t j = 0; j < n; j++) aty[j] = 0.0;
        for (Py_ssize_t i = 0; i < m; i++) {
            double acc = 0.0;
            for (int64_t k = indptr[i]; k < indptr[i + 1]; k++) {
                acc = acc + data[k] * x[indices[k]];
                aty[indices[k]] = aty[indices[k]] + data[k] * y[i];
            }
            ax[i] = acc;
        }
        Py_INCREF(Py_None);
        result = Py_None;
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* take_rows(indptr, indices, data, lo, up, rows, local, indptr_out, indices_out, data_out,
 *           lo_out, up_out) -> entries written: rows `rows` in their order, each column j
 *           renumbered local[j] */
static PyObject *py_take_rows(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[12];
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOO", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5],
                          &o[6], &o[7], &o[8], &o[9], &o[10], &o[11]))
        return NULL;
    /* indptr, data, rows and local give m, nnz, the rows taken and n */
    Py_ssize_t m = items_in(o[0], 8) - 1, nnz = items_in(o[2], 8), mr = items_in(o[5], 8);
    Py_ssize_t n = items_in(o[6], 8);
    if (PyErr_Occurred()) return NULL;
    if (m < 0) { PyErr_SetString(PyExc_ValueError, "qp_rows kernel: empty indptr"); return NULL; }
    const char kinds[12] = {'q', 'q', 'd', 'd', 'd', 'q', 'q', 'q', 'q', 'd', 'd', 'd'};
    const Py_ssize_t items[12] = {m + 1, nnz, nnz, m, m, mr, n, mr + 1, 0, 0, mr, mr};
    Py_buffer v[12];
    int got = 0;
    PyObject *result = NULL;
    for (got = 0; got < 12; got++)
        if (get(o[got], &v[got], got >= 7, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *indptr = v[0].buf, *indices = v[1].buf, *rows = v[5].buf;
        const int64_t *local = v[6].buf;
        const double *data = v[2].buf, *lo = v[3].buf, *up = v[4].buf;
        int64_t *ip = v[7].buf, *ix = v[8].buf;
        double *dv = v[9].buf, *lv = v[10].buf, *uv = v[11].buf;
        Py_ssize_t room = v[8].len / 8 < v[9].len / 8 ? v[8].len / 8 : v[9].len / 8;
        int64_t k = 0;
        ip[0] = 0;
        for (Py_ssize_t r = 0; r < mr; r++) {   /* only the rows taken are checked */
            int64_t i = rows[r];
            if (i < 0 || i >= m || indptr[i] < 0 || indptr[i + 1] < indptr[i]
                || indptr[i + 1] > nnz || k + (indptr[i + 1] - indptr[i]) > room) {
                PyErr_SetString(PyExc_ValueError, "qp_rows kernel: a row out of range");
                goto done;
            }
            for (int64_t e = indptr[i]; e < indptr[i + 1]; e++) {
                if (indices[e] < 0 || indices[e] >= n) {
                    PyErr_SetString(PyExc_ValueError, "qp_rows kernel: a column out of range");
                    goto done;
                }
                ix[k] = local[indices[e]];
                dv[k] = data[e];
                k++;
            }
            ip[r + 1] = k;
            lv[r] = lo[i];
            uv[r] = up[i];
        }
        result = PyLong_FromLongLong((long long)k);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* numpy's maximum and minimum: a NaN on either side wins */
static inline double np_max(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a > b ? a : b);
}

static inline double np_min(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a < b ? a : b);
}

/* start_point(kind, lo, up, mu0, sl, su, zl, zu): banded_ipm._start's slacks, each side's
 * distance from 0 shifted by max(-1.5 low, 0) (low: the smallest, Python's min of the two
 * sides' numpy minima) plus the floor, 1 where the side is absent; multipliers mu0 / slack. */
static PyObject *py_start_point(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[7];
    double mu0, floor_;
    if (!PyArg_ParseTuple(args, "OOOddOOOO", &o[0], &o[1], &o[2], &mu0, &floor_, &o[3], &o[4],
                          &o[5], &o[6]))
        return NULL;
    Py_ssize_t m = items_in(o[0], 1);
    if (m < 0) return NULL;
    const char kinds[7] = {'b', 'd', 'd', 'd', 'd', 'd', 'd'};
    Py_buffer v[7];
    int got = 0;
    PyObject *result = NULL;
    for (got = 0; got < 7; got++)
        if (get(o[got], &v[got], got >= 3, m, kinds[got]) != 0) goto done;
    {
        const int8_t *kind = v[0].buf;
        const double *lo = v[1].buf, *up = v[2].buf;
        double *sl = v[3].buf, *su = v[4].buf, *zl = v[5].buf, *zu = v[6].buf;
        double low_l = INFINITY, low_u = INFINITY;
        for (Py_ssize_t i = 0; i < m; i++) {
            int k = kind[i];
            sl[i] = (k == 1 || k == 3) ? -lo[i] : INFINITY;
            su[i] = (k == 2 || k == 3) ? up[i] : INFINITY;
            low_l = np_min(low_l, sl[i]);
            low_u = np_min(low_u, su[i]);
        }
        double low = low_u < low_l ? low_u : low_l;            /* Python's min(low_l, low_u) */
        double shift = 0.0;
        if (isfinite(low)) shift = 0.0 > -1.5 * low ? 0.0 : -1.5 * low;   /* Python's max */
        for (Py_ssize_t i = 0; i < m; i++) {
            int k = kind[i];
            sl[i] = isfinite(sl[i]) ? sl[i] + shift + floor_ : 1.0;
            su[i] = isfinite(su[i]) ? su[i] + shift + floor_ : 1.0;
            zl[i] = (k == 1 || k == 3) ? mu0 / sl[i] : 0.0;
            zu[i] = (k == 2 || k == 3) ? mu0 / su[i] : 0.0;
        }
        Py_INCREF(Py_None);
        result = Py_None;
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* box_extent(indptr, indices, data, lo, up, kind, n) -> how far from 0 any point of the
 * variables' box reaches (banded_ipm._box_extent) */
static PyObject *py_box_extent(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[6];
    Py_ssize_t n;
    if (!PyArg_ParseTuple(args, "OOOOOOn", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &n))
        return NULL;
    Py_ssize_t nnz = items_in(o[2], 8), m = items_in(o[5], 1);
    if (nnz < 0 || m < 0) return NULL;
    if (n < 0) { PyErr_SetString(PyExc_ValueError, "qp_rows kernel: bad sizes"); return NULL; }
    const char kinds[6] = {'q', 'q', 'd', 'd', 'd', 'b'};
    const Py_ssize_t items[6] = {m + 1, nnz, nnz, m, m, m};
    Py_buffer v[6];
    int got = 0;
    PyObject *result = NULL;
    double *box = NULL;
    for (got = 0; got < 6; got++)
        if (get(o[got], &v[got], 0, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *indptr = v[0].buf, *indices = v[1].buf;
        const double *data = v[2].buf, *lo = v[3].buf, *up = v[4].buf;
        const int8_t *kind = v[5].buf;
        if (check_rows(indptr, indices, m, nnz, n) != 0) goto done;
        box = malloc(sizeof(double) * 2 * (size_t)(n > 0 ? n : 1));
        if (!box) { PyErr_NoMemory(); goto done; }
        for (Py_ssize_t j = 0; j < n; j++) { box[2 * j] = -INFINITY; box[2 * j + 1] = INFINITY; }
        for (Py_ssize_t i = 0; i < m; i++) {
            int64_t k = indptr[i];
            if (indptr[i + 1] - k != 1 || data[k] == 0.0) continue;
            int ki = kind[i];
            double a = data[k];
            int has_lo = ki == 1 || ki >= 3, has_up = ki == 2 || ki == 3 || ki == 4;
            double from_lo = lo[i] / a, from_up = (ki == 4 ? lo[i] : up[i]) / a;
            double l, u;
            if (a > 0) {            /* lo <= a x <= up: x >= lo / a, x <= up / a */
                l = has_lo ? from_lo : -INFINITY;
                u = has_up ? from_up : INFINITY;
            } else {                /* the sides swap */
                l = has_up ? from_up : -INFINITY;
                u = has_lo ? from_lo : INFINITY;
            }
            int64_t j = indices[k];
            box[2 * j] = np_max(box[2 * j], l);
            box[2 * j + 1] = np_min(box[2 * j + 1], u);
        }
        double out = 0.0;
        for (Py_ssize_t j = 0; j < n; j++)
            out = np_max(out, np_max(fabs(box[2 * j]), fabs(box[2 * j + 1])));
        result = PyFloat_FromDouble(out);
    }
done:
    free(box);
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* Breadth-first search from root over the columns stamp[] does not hold `mark` for, stamping
 * them; writes them to queue[] in the order reached; returns how many. */
static Py_ssize_t bfs(const int64_t *start, const int64_t *nb, int64_t root, int64_t *stamp,
                      int64_t mark, int64_t *queue)
{
    Py_ssize_t head = 0, tail = 0;
    queue[tail++] = root;
    stamp[root] = mark;
    while (head < tail) {
        int64_t j = queue[head++];
        for (int64_t k = start[j]; k < start[j + 1]; k++)
            if (stamp[nb[k]] != mark) { stamp[nb[k]] = mark; queue[tail++] = nb[k]; }
    }
    return tail;
}

/* search_order(start, neighbours, order) -> None: banded_ipm._far_order_numpy. Part by part
 * (the lowest column not yet placed starts each), the columns in breadth-first order from the
 * column a first search from that lowest one reaches last, over the adjacency lists
 * neighbours[start[j]:start[j+1]]. */
static PyObject *py_search_order(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[3];
    if (!PyArg_ParseTuple(args, "OOO", &o[0], &o[1], &o[2])) return NULL;
    Py_ssize_t n = items_in(o[0], 8) - 1, nnz = items_in(o[1], 8);
    if (n < 0 || nnz < 0) {
        if (!PyErr_Occurred())
            PyErr_SetString(PyExc_ValueError, "qp_rows kernel: bad sizes");
        return NULL;
    }
    Py_buffer v[3];
    const char kinds[3] = {'q', 'q', 'q'};
    const Py_ssize_t items[3] = {n + 1, nnz, n};
    int got = 0;
    PyObject *result = NULL;
    int64_t *stamp = NULL;
    for (got = 0; got < 3; got++)
        if (get(o[got], &v[got], got == 2, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *start = v[0].buf, *nb = v[1].buf;
        int64_t *order = v[2].buf;
        for (Py_ssize_t j = 0; j < n; j++)
            if (start[j] < 0 || start[j] > start[j + 1] || start[j + 1] > nnz) {
                PyErr_SetString(PyExc_ValueError, "qp_rows kernel: bad adjacency");
                goto done;
            }
        for (Py_ssize_t k = 0; k < nnz; k++)
            if (nb[k] < 0 || nb[k] >= n) {
                PyErr_SetString(PyExc_ValueError, "qp_rows kernel: bad adjacency");
                goto done;
            }
        stamp = malloc(sizeof(int64_t) * 2 * (size_t)(n > 0 ? n : 1));
        if (!stamp) { PyErr_NoMemory(); goto done; }
        int64_t *placed = stamp + n;        /* -1 until a part's second search places it */
        for (Py_ssize_t j = 0; j < n; j++) { stamp[j] = -1; placed[j] = -1; }
        Py_ssize_t done_ = 0, lowest = 0;
        int64_t part = 0;
        while (done_ < n) {
            while (placed[lowest] != -1) lowest++;
            Py_ssize_t size = bfs(start, nb, lowest, stamp, part, order + done_);
            int64_t far = order[done_ + size - 1];
            bfs(start, nb, far, placed, part, order + done_);
            done_ += size;
            part++;
        }
        Py_INCREF(Py_None);
        result = Py_None;
    }
done:
    free(stamp);
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

static PyMethodDef methods[] = {
    {"reduce_into", py_reduce_into, METH_VARARGS,
     "reduce_into(cols, present, vals, lo, up, fixed, values, free_number, indptr, indices, "
     "data, lo_out, up_out, row0, k0) -> (row1, k1): the table's kept rows written from row "
     "row0 and entry k0 on (qp_rows.reduce_rows)."},
    {"scale_rows", py_scale_rows, METH_VARARGS,
     "scale_rows(indptr, indices, data, lo, up, centre, scale, data_out, lo_out, up_out, "
     "kind_out, centred) -> bandwidth of the rows (banded_ipm._prepare_rows)."},
    {"row_products", py_row_products, METH_VARARGS,
     "row_products(indptr, indices, data, x, y, ax, aty): A x and A'y (banded_ipm._judge)."},
    {"take_rows", py_take_rows, METH_VARARGS,
     "take_rows(indptr, indices, data, lo, up, rows, local, indptr_out, indices_out, "
     "data_out, lo_out, up_out) -> entries written (qp_rows.RowQP.take)."},
    {"start_point", py_start_point, METH_VARARGS,
     "start_point(kind, lo, up, mu0, floor, sl, su, zl, zu) (banded_ipm._start)."},
    {"box_extent", py_box_extent, METH_VARARGS,
     "box_extent(indptr, indices, data, lo, up, kind, n) -> float (banded_ipm._box_extent)."},
    {"search_order", py_search_order, METH_VARARGS,
     "search_order(start, neighbours, order): breadth-first order from a far column, part by "
     "part (banded_ipm._far_order_numpy)."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_qp_rows", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__qp_rows(void) { return PyModule_Create(&module); }

/* The banded interior-point method's frame around its compiled iterations, each the twin of
 * numpy code in banded_ipm.py that stays as the reference the tests compare against:
 *
 * - frame: the objective's part of _prepare_rows (q + P centre, scaled; P's entries scaled and
 *   laid out in band storage as _P_band does, each slot summed from zero; the bandwidth of P)
 *   and, for a QP whose answer lies near its centre, _start_near's slacks and multipliers. The
 *   same operations in the same order: the same numbers to the last bit (built with
 *   -ffp-contract=off; numpy's maximum propagates NaN, Python's max keeps its first argument
 *   unless the second is larger).
 * - judge_sums: the quantities _judge decides on (the answer's finiteness, lo'z_lo - up'z_up,
 *   the largest |A'y|, row violation and |dual residual|, the sum of |dual residual|, x'Px and
 *   q'x). Its sums run in index order, where numpy sums pairwise and its dot products go to
 *   BLAS: the same values to round-off (a few units in the last place of each sum), which
 *   only matters for an answer exactly at a tolerance; the decisions stay in _judge.
 *
 * Only the buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

static inline double np_max(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a > b ? a : b);
}

/* An array of at least (outputs) or exactly (inputs) `items` entries of kind 'q' (int64),
 * 'd' (double) or 'b' (int8). */
static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, char kind)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) != 0) return -1;
    Py_ssize_t size = kind == 'b' ? 1 : 8;
    const char *f = v->format;
    int fmt_ok = kind == 'b' ? strcmp(f, "b") == 0
               : kind == 'q' ? (strcmp(f, "q") == 0 || (strcmp(f, "l") == 0 && sizeof(long) == 8))
               : strcmp(f, "d") == 0;
    int len_ok = writable ? v->len >= items * size : v->len == items * size;
    if (!fmt_ok || v->itemsize != size || !len_ok) {
        PyErr_SetString(PyExc_ValueError, "ipm_frame kernel: an array has the wrong type or "
                        "length");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

static Py_ssize_t length(PyObject *o, Py_ssize_t size)
{
    Py_buffer b;
    if (PyObject_GetBuffer(o, &b, PyBUF_C_CONTIGUOUS) != 0) return -1;
    Py_ssize_t n = b.len / size;
    PyBuffer_Release(&b);
    return n;
}

/* frame(prow, pcol, pval, q, centre, scale, kind, lo, up, q_out, Pb_out, sl, su, zl, zu,
 *       centred, near, kd_rows, max_kd, slack_floor, mu_fraction) -> the bandwidth (P's or
 *       the rows' kd_rows, the larger; P laid out in it), or -1 where it is wider than max_kd
 *       (nothing written to Pb_out) */
static PyObject *py_frame(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[15];
    int centred, near;
    long long kd_rows, max_kd;
    double floor_, fraction;
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOOOOOppLLdd", &o[0], &o[1], &o[2], &o[3], &o[4],
                          &o[5], &o[6], &o[7], &o[8], &o[9], &o[10], &o[11], &o[12], &o[13],
                          &o[14], &centred, &near, &kd_rows, &max_kd, &floor_, &fraction))
        return NULL;
    Py_ssize_t ne = length(o[0], 8), n = length(o[3], 8), m = length(o[6], 1);
    if (ne < 0 || n < 0 || m < 0) return NULL;
    const Py_ssize_t items[15] = {ne, ne, ne, n, n, n, m, m, m, n, (max_kd + 1) * n, m, m, m, m};
    const char kinds[15] = {'q', 'q', 'd', 'd', 'd', 'd', 'b', 'd', 'd', 'd', 'd', 'd', 'd',
                            'd', 'd'};
    Py_buffer v[15];
    int got;
    PyObject *result = NULL;
    for (got = 0; got < 15; got++)
        if (get(o[got], &v[got], got >= 9, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *prow = v[0].buf, *pcol = v[1].buf;
        const double *pval = v[2].buf, *q = v[3].buf, *centre = v[4].buf, *scale = v[5].buf;
        const signed char *kind = v[6].buf;
        const double *lo = v[7].buf, *up = v[8].buf;
        double *q_out = v[9].buf, *Pb = v[10].buf;
        double *sl = v[11].buf, *su = v[12].buf, *zl = v[13].buf, *zu = v[14].buf;
        int64_t kd = kd_rows > 0 ? kd_rows : 0;
        for (Py_ssize_t i = 0; i < ne; i++) {
            if (prow[i] < 0 || prow[i] >= n || pcol[i] < 0 || pcol[i] >= n) {
                PyErr_SetString(PyExc_ValueError, "ipm_frame kernel: an entry out of range");
                goto done;
            }
            int64_t d = prow[i] > pcol[i] ? prow[i] - pcol[i] : pcol[i] - prow[i];
            if (d > kd) kd = d;
        }
        /* q: scale * (q + P centre), P centre summed row by row from zero in entry order */
        if (centred) {
            for (Py_ssize_t j = 0; j < n; j++) q_out[j] = 0.0;
            for (Py_ssize_t i = 0; i < ne; i++)
                q_out[prow[i]] = q_out[prow[i]] + pval[i] * centre[pcol[i]];
            for (Py_ssize_t j = 0; j < n; j++) q_out[j] = scale[j] * (q[j] + q_out[j]);
        } else {
            memcpy(q_out, q, (size_t)n * sizeof(double));
        }
        if (kd <= max_kd) {
            memset(Pb, 0, (size_t)((kd + 1) * n) * sizeof(double));
            for (Py_ssize_t i = 0; i < ne; i++) {
                if (prow[i] < pcol[i]) continue;
                double value = centred ? pval[i] * scale[prow[i]] * scale[pcol[i]] : pval[i];
                Py_ssize_t slot = (Py_ssize_t)(prow[i] - pcol[i]) * n + pcol[i];
                Pb[slot] = Pb[slot] + value;
            }
        }
        if (near) {             /* _start_near */
            double top = 0.0;
            for (Py_ssize_t j = 0; j < n; j++) top = np_max(top, fabs(q_out[j]));
            double mu0 = fraction * (top > 1.0 ? top : 1.0);
            for (Py_ssize_t i = 0; i < m; i++) {
                int lower = kind[i] == 1 || kind[i] == 3, upper = kind[i] == 2 || kind[i] == 3;
                sl[i] = lower ? np_max(-lo[i], floor_) : 1.0;
                su[i] = upper ? np_max(up[i], floor_) : 1.0;
                zl[i] = lower ? mu0 / sl[i] : 0.0;
                zu[i] = upper ? mu0 / su[i] : 0.0;
            }
        }
        result = PyLong_FromLongLong(kd <= max_kd ? (long long)kd : -1LL);
    }
done:
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

/* judge_sums(indptr, indices, data, lo, up, kind, Pb, q, x, zl, zu) -> (finite, margin,
 *   max |A'y|, max violation, max |dual|, sum |dual|, x'Px, q'x): banded_ipm._judge's
 *   quantities (y = z_lo for an equality row, 0 for an empty one, z_lo - z_up otherwise) */
static PyObject *py_judge_sums(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[11];
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOO", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &o[6],
                          &o[7], &o[8], &o[9], &o[10]))
        return NULL;
    Py_ssize_t m = length(o[3], 8), nnz = length(o[1], 8), n = length(o[8], 8);
    Py_ssize_t band = length(o[6], 8);
    if (m < 0 || nnz < 0 || n < 0 || band < 0) return NULL;
    if (n == 0 || band % n != 0) {
        PyErr_SetString(PyExc_ValueError, "ipm_frame kernel: P's band does not fit x");
        return NULL;
    }
    Py_ssize_t kd = band / n - 1;
    const Py_ssize_t items[11] = {m + 1, nnz, nnz, m, m, m, band, n, n, m, m};
    const char kinds[11] = {'q', 'q', 'd', 'd', 'd', 'b', 'd', 'd', 'd', 'd', 'd'};
    Py_buffer v[11];
    int got;
    PyObject *result = NULL;
    double *work = NULL;
    for (got = 0; got < 11; got++)
        if (get(o[got], &v[got], 0, items[got], kinds[got]) != 0) goto done;
    {
        const int64_t *indptr = v[0].buf, *indices = v[1].buf;
        const double *data = v[2].buf, *lo = v[3].buf, *up = v[4].buf, *Pb = v[6].buf;
        const signed char *kind = v[5].buf;
        const double *q = v[7].buf, *x = v[8].buf, *zl = v[9].buf, *zu = v[10].buf;
        if (indptr[0] != 0 || indptr[m] != nnz) {
            PyErr_SetString(PyExc_ValueError, "ipm_frame kernel: bad row pointers");
            goto done;
        }
        for (Py_ssize_t k = 0; k < nnz; k++) {
            if (indices[k] < 0 || indices[k] >= n) {
                PyErr_SetString(PyExc_ValueError, "ipm_frame kernel: a column out of range");
                goto done;
            }
        }
        int finite = 1;
        for (Py_ssize_t j = 0; j < n; j++) finite &= isfinite(x[j]) != 0;
        if (!finite) {
            result = Py_BuildValue("(iddddddd)", 0, NAN, NAN, NAN, NAN, NAN, NAN, NAN);
            goto done;
        }
        work = calloc((size_t)n, sizeof(double));          /* A'y */
        if (!work) {
            PyErr_NoMemory();
            goto done;
        }
        double lo_sum = 0.0, up_sum = 0.0, viol = 0.0;
        for (Py_ssize_t i = 0; i < m; i++) {
            double y = kind[i] == 4 ? zl[i] : kind[i] == 0 ? 0.0 : zl[i] - zu[i];
            double r = 0.0;
            for (int64_t k = indptr[i]; k < indptr[i + 1]; k++) {
                r = r + data[k] * x[indices[k]];
                work[indices[k]] = work[indices[k]] + data[k] * y;
            }
            if (kind[i] == 1 || kind[i] >= 3) lo_sum += lo[i] * zl[i];
            if (kind[i] == 2 || kind[i] == 3) up_sum += up[i] * zu[i];
            viol = np_max(viol, np_max(lo[i] - r, r - up[i]));
        }
        double aty_max = 0.0, dual_max = 0.0, dual_sum = 0.0, xpx = 0.0, qx = 0.0;
        for (Py_ssize_t j = 0; j < n; j++) {
            double px = Pb[j] * x[j];                          /* P x from the lower band */
            for (Py_ssize_t d = 1; d <= kd; d++) {
                if (j >= d) px += Pb[d * n + j - d] * x[j - d];
                if (j + d < n) px += Pb[d * n + j] * x[j + d];
            }
            double dual = px + q[j] - work[j];
            aty_max = np_max(aty_max, fabs(work[j]));
            dual_max = np_max(dual_max, fabs(dual));
            dual_sum += fabs(dual);
            xpx += x[j] * px;
            qx += q[j] * x[j];
        }
        result = Py_BuildValue("(iddddddd)", 1, lo_sum - up_sum, aty_max, viol, dual_max,
                               dual_sum, xpx, qx);
    }
done:
    free(work);
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

static PyMethodDef methods[] = {
    {"frame", py_frame, METH_VARARGS,
     "frame(prow, pcol, pval, q, centre, scale, kind, lo, up, q_out, Pb_out, sl, su, zl, zu, "
     "centred, near, kd_rows, max_kd, slack_floor, mu_fraction) -> bandwidth, or -1 "
     "(banded_ipm._prepare_rows' objective part and _start_near)."},
    {"judge_sums", py_judge_sums, METH_VARARGS,
     "judge_sums(indptr, indices, data, lo, up, kind, Pb, q, x, zl, zu) -> (finite, margin, "
     "max |A'y|, max violation, max |dual|, sum |dual|, x'Px, q'x) (banded_ipm._judge)."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_ipm_frame", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__ipm_frame(void) { return PyModule_Create(&module); }

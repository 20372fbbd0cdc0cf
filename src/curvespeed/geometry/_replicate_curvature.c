/* Compiled twin of the noise replicates' curvature changes (scales.Scale.add_replicates).
 *
 * For each node i and replicate r: the replicate's first and second derivatives are the scale's
 * own (d1, d2) plus the spline of the replicate's coefficients evaluated there, from the node's
 * k + 1 nonzero B-spline derivative values (v1, v2, starting at coefficient first[i]); the
 * change is the curvature (x'y'' - y'x'') / |r'|^3 of that minus the scale's own kappa[i].
 * The coefficients delta (ncoef, 2c) hold the replicates' x in columns 0..c-1 and their y in
 * c..2c-1. The numpy path makes a dozen temporaries of (n, c) and two sparse products per
 * chunk; this is one pass over the nodes, in the numpy path's operations and order (the sums
 * in the sparse product's, no fused multiply-adds: built with -ffp-contract=off), so the two
 * agree to the last bit. |r'|^3 is s sqrt(s), s = |r'|^2, in both: libm's pow and hypot
 * (hypot(x', y') ** 3) cost more than all the rest together. The running sum of the squared
 * changes over the replicates is added here too, for a chunk of 8 in the order numpy's sum of a
 * row of 8 takes (its pairwise sum: ((q0 + q1) + (q2 + q3)) + ((q4 + q5) + (q6 + q7))): numpy's
 * square and sum of the (n, 8) changes took half as long again as the kernel. Only the buffer
 * protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>

#define BLOCK 8     /* replicates at a time: the sums over a node's B-splines run across them */

static void changes(const int64_t *first, const double *v1, const double *v2,
                    const double *delta, const double *d1, const double *d2,
                    const double *kappa, double *out, double *sums, int64_t n, int64_t w,
                    int64_t c)
{
    const int64_t cols = 2 * c;
    for (int64_t i = 0; i < n; i++) {
        const double *a = v1 + i * w, *b = v2 + i * w;
        const double *rows = delta + first[i] * cols;
        for (int64_t r0 = 0; r0 < c; r0 += BLOCK) {
            const int64_t m = c - r0 < BLOCK ? c - r0 : BLOCK;
            double e1x[BLOCK] = {0}, e1y[BLOCK] = {0}, e2x[BLOCK] = {0}, e2y[BLOCK] = {0};
            for (int64_t j = 0; j < w; j++) {
                const double *x = rows + j * cols + r0, *y = x + c;
                const double aj = a[j], bj = b[j];
                for (int64_t r = 0; r < m; r++) {
                    e1x[r] += aj * x[r];
                    e1y[r] += aj * y[r];
                    e2x[r] += bj * x[r];
                    e2y[r] += bj * y[r];
                }
            }
            for (int64_t r = 0; r < m; r++) {
                const double p1x = d1[2 * i] + e1x[r], p1y = d1[2 * i + 1] + e1y[r];
                const double p2x = d2[2 * i] + e2x[r], p2y = d2[2 * i + 1] + e2y[r];
                const double cross = p1x * p2y - p1y * p2x;
                const double sq = p1x * p1x + p1y * p1y;
                out[i * c + r0 + r] = cross / (sq * sqrt(sq)) - kappa[i];
            }
        }
        if (sums != NULL) {     /* c == 8: numpy's pairwise sum of a row of 8, in its order */
            double q[BLOCK];
            for (int r = 0; r < BLOCK; r++)
                q[r] = out[i * c + r] * out[i * c + r];
            sums[i] += ((q[0] + q[1]) + (q[2] + q[3])) + ((q[4] + q[5]) + (q[6] + q[7]));
        }
    }
}

/* A C-contiguous buffer of count 8-byte items: int64 (integer) or float64. */
static int get(PyObject *o, Py_buffer *v, int flags, int integer, Py_ssize_t count)
{
    if (PyObject_GetBuffer(o, v, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | flags) != 0)
        return -1;
    const char f = v->format ? v->format[v->format[0] == '<' || v->format[0] == '=' ? 1 : 0] : 'B';
    const int kind_ok = integer ? (f == 'q' || f == 'l') : f == 'd';
    if (!kind_ok || v->itemsize != 8 || v->len != count * 8) {
        PyBuffer_Release(v);
        PyErr_SetString(PyExc_ValueError, "changes: array of the wrong size or type");
        return -1;
    }
    return 0;
}

static PyObject *py_changes(PyObject *self, PyObject *args)
{
    PyObject *o[9];
    long long n, w, ncoef, c;
    if (!PyArg_ParseTuple(args, "OOOOOOOOOLLLL", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5],
                          &o[6], &o[7], &o[8], &n, &w, &ncoef, &c))
        return NULL;
    if (n < 0 || w < 1 || ncoef < w || c < 1) {
        PyErr_SetString(PyExc_ValueError, "changes: bad sizes");
        return NULL;
    }
    const int with_sums = o[8] != Py_None;
    if (with_sums && c != BLOCK) {
        PyErr_SetString(PyExc_ValueError, "changes: sums need 8 replicates");
        return NULL;
    }
    const Py_ssize_t counts[9] = {n, n * w, n * w, ncoef * 2 * c, 2 * n, 2 * n, n, n * c, n};
    Py_buffer v[9];
    int got = 0;
    PyObject *result = NULL;
    for (; got < 8 + with_sums; got++)
        if (get(o[got], &v[got], got >= 7 ? PyBUF_WRITABLE : 0, got == 0, counts[got]) != 0)
            goto done;
    const int64_t *first = v[0].buf;
    for (int64_t i = 0; i < n; i++)
        if (first[i] < 0 || first[i] > ncoef - w) {
            PyErr_SetString(PyExc_ValueError, "changes: a node's first coefficient is out of range");
            goto done;
        }
    Py_BEGIN_ALLOW_THREADS
    changes(first, v[1].buf, v[2].buf, v[3].buf, v[4].buf, v[5].buf, v[6].buf, v[7].buf,
            with_sums ? v[8].buf : NULL, n, w, c);
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    while (got-- > 0)
        PyBuffer_Release(&v[got]);
    return result;
}

static PyMethodDef methods[] = {
    {"changes", py_changes, METH_VARARGS,
     "changes(first, v1, v2, delta, d1, d2, kappa, out, sums, n, w, ncoef, c): out (n, c) <- "
     "the curvature change of each replicate at each node, and sums (n,) += the sum of each "
     "node's squared changes (numpy's order; c must be 8; None: no sums). first (n,) int64; "
     "v1, v2 (n, w) the nonzero first and second derivative B-spline values from coefficient "
     "first[i]; delta (ncoef, 2c) the replicates' coefficients, x then y; d1, d2 (n, 2) and "
     "kappa (n,) the scale's own. All float64 but first, C order."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_replicate_curvature", NULL, -1,
                                    methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__replicate_curvature(void) { return PyModule_Create(&module); }

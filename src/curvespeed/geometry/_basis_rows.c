/* Products of a uniform B-spline design matrix kept as rows (basis_rows.py): row i holds w
 * consecutive basis values vals[i * w + r] in columns first[i] + r (modulo n when wrap).
 *
 * times:           out (m, d) = B c for c (n, d): each row's terms summed in r order from zero
 *                  (for d = 2, a plane curve's x and y, the two sums kept in registers: five
 *                  times faster than the general loop's stores through out).
 * transpose_times: out (n, d) += B^T x for x (m, d): the rows in order, each adding its w
 *                  terms in r order.
 * The numpy code in basis_rows.py takes the same operations in the same order (the package is
 * built without fused multiply-adds), so the two agree to the last bit; compiled, the products
 * cost what a sparse-matrix library's do, where numpy's passes took 7 to 40 times longer.
 * values:          the basis polynomials of uniform_spline.basis_values at the points, by its
 *                  Horner passes, written as rows (point by point) rather than its columns.
 * Only the buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>

static void times(const int64_t *first, const double *vals, const double *c, double *out,
                  int64_t m, int64_t w, int64_t n, int64_t d, int wrap)
{
    if (d == 2 && !wrap) {      /* a plane curve's x and y: the same sums, kept in registers */
        for (int64_t i = 0; i < m; i++) {
            const double *v = vals + i * w, *x = c + first[i] * 2;
            double y0 = 0.0, y1 = 0.0;
            for (int64_t r = 0; r < w; r++) {
                y0 += v[r] * x[2 * r];
                y1 += v[r] * x[2 * r + 1];
            }
            out[2 * i] = y0;
            out[2 * i + 1] = y1;
        }
        return;
    }
    for (int64_t i = 0; i < m; i++) {
        double *y = out + i * d;
        for (int64_t k = 0; k < d; k++) y[k] = 0.0;
        for (int64_t r = 0; r < w; r++) {
            int64_t col = first[i] + r;
            if (wrap) col %= n;
            const double v = vals[i * w + r];
            const double *x = c + col * d;
            for (int64_t k = 0; k < d; k++) y[k] += v * x[k];
        }
    }
}

static void transpose_times(const int64_t *first, const double *vals, const double *x,
                            double *out, int64_t m, int64_t w, int64_t n, int64_t d, int wrap)
{
    for (int64_t i = 0; i < m; i++) {
        const double *xi = x + i * d;
        for (int64_t r = 0; r < w; r++) {
            int64_t col = first[i] + r;
            if (wrap) col %= n;
            const double v = vals[i * w + r];
            double *y = out + col * d;
            for (int64_t k = 0; k < d; k++) y[k] += v * xi[k];
        }
    }
}

/* A C-contiguous buffer of len 8-byte items: int64 (integer) or float64. */
static int get(PyObject *o, Py_buffer *view, Py_ssize_t len, int writable, int integer)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, view, flags) != 0)
        return -1;
    const char *fmt = view->format ? view->format : "B";
    const char f = fmt[fmt[0] == '<' || fmt[0] == '=' ? 1 : 0];
    const int kind_ok = integer ? (f == 'q' || f == 'l') : f == 'd';
    if (!kind_ok || view->itemsize != 8 || view->len != len * 8) {
        PyBuffer_Release(view);
        PyErr_SetString(PyExc_ValueError, "basis rows: array of the wrong size or type");
        return -1;
    }
    return 0;
}

/* (first, vals, src, out, m, w, n, d, wrap): src is c (n, d) for times, x (m, d) for the
 * transpose; out is (m, d) or (n, d) */
static PyObject *run(PyObject *args, int transpose)
{
    PyObject *o[4];
    long long m, w, n, d;
    int wrap;
    if (!PyArg_ParseTuple(args, "OOOOLLLLp", &o[0], &o[1], &o[2], &o[3], &m, &w, &n, &d, &wrap))
        return NULL;
    if (m < 0 || w < 1 || n < 1 || d < 0) {
        PyErr_SetString(PyExc_ValueError, "basis rows: bad sizes");
        return NULL;
    }
    Py_ssize_t lens[4] = {m, m * w, (transpose ? m : n) * d, (transpose ? n : m) * d};
    Py_buffer v[4];
    int got = 0;
    for (; got < 4; got++)
        if (get(o[got], &v[got], lens[got], got == 3, got == 0) != 0)
            break;
    PyObject *result = NULL;
    if (got == 4) {
        const int64_t *first = v[0].buf;
        int bad = 0;
        for (int64_t i = 0; i < m; i++)
            if (first[i] < 0 || (!wrap && first[i] + w > n)) bad = 1;
        if (bad) {
            PyErr_SetString(PyExc_ValueError, "basis rows: a row reaches outside the columns");
        } else {
            Py_BEGIN_ALLOW_THREADS
            if (transpose)
                transpose_times(first, v[1].buf, v[2].buf, v[3].buf, m, w, n, d, wrap);
            else
                times(first, v[1].buf, v[2].buf, v[3].buf, m, w, n, d, wrap);
            Py_END_ALLOW_THREADS
            Py_INCREF(Py_None);
            result = Py_None;
        }
    }
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

/* values: out (m, w) <- the w basis polynomials at local coordinates tau (m,) by Horner's rule
 * on table (p, w), row q the coefficients of tau^q (uniform_spline.basis_values's table): start
 * from the last row, then multiply by tau and add the row before, one rounding each, as numpy's
 * in-place passes do. */
static void values(const double *tau, const double *table, double *out, int64_t m, int64_t p,
                   int64_t w)
{
    for (int64_t i = 0; i < m; i++) {     /* the w polynomials side by side: independent */
        const double t = tau[i];
        double *y = out + i * w;
        for (int64_t r = 0; r < w; r++)
            y[r] = table[(p - 1) * w + r];
        for (int64_t q = p - 2; q >= 0; q--) {
            const double *c = table + q * w;
            for (int64_t r = 0; r < w; r++) {
                y[r] *= t;
                y[r] += c[r];
            }
        }
    }
}

static PyObject *py_values(PyObject *self, PyObject *args)
{
    PyObject *o[3];
    long long m, p, w;
    if (!PyArg_ParseTuple(args, "OOOLLL", &o[0], &o[1], &o[2], &m, &p, &w))
        return NULL;
    if (m < 0 || p < 1 || w < 1) {
        PyErr_SetString(PyExc_ValueError, "basis rows: bad sizes");
        return NULL;
    }
    const Py_ssize_t lens[3] = {m, p * w, m * w};
    Py_buffer v[3];
    int got = 0;
    for (; got < 3; got++)
        if (get(o[got], &v[got], lens[got], got == 2, 0) != 0)
            break;
    PyObject *result = NULL;
    if (got == 3) {
        Py_BEGIN_ALLOW_THREADS
        values(v[0].buf, v[1].buf, v[2].buf, m, p, w);
        Py_END_ALLOW_THREADS
        Py_INCREF(Py_None);
        result = Py_None;
    }
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

static PyObject *py_times(PyObject *self, PyObject *args) { return run(args, 0); }
static PyObject *py_transpose_times(PyObject *self, PyObject *args) { return run(args, 1); }

static PyMethodDef methods[] = {
    {"times", py_times, METH_VARARGS,
     "times(first, vals, c, out, m, w, n, d, wrap): out (m, d) = B c, c (n, d); first int64 "
     "(m,), vals (m, w), all C order."},
    {"transpose_times", py_transpose_times, METH_VARARGS,
     "transpose_times(first, vals, x, out, m, w, n, d, wrap): out (n, d) += B^T x, x (m, d)."},
    {"values", py_values, METH_VARARGS,
     "values(tau, table, out, m, p, w): out (m, w) <- the polynomials of table (p, w), row q "
     "the coefficients of tau^q, at tau (m,) by Horner's rule."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_basis_rows", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__basis_rows(void) { return PyModule_Create(&module); }

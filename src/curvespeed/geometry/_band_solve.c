/* Banded Cholesky factorisation and solve of symmetric positive definite systems.
 *
 * factor: A = U^T U in place, A's upper band given as ut (n, u + 1) with ut[j, u + i - j] =
 * A[i, j] (i <= j); the same memory as LAPACK's upper band storage in Fortran order. Column j of
 * U is found from the columns before it (U[i, j] = (A[i, j] - sum_k U[k, i] U[k, j]) / U[i, i],
 * U[j, j] = sqrt(A[j, j] - sum_k U[k, j]^2)), each a contiguous row of ut. A pivot that is not
 * positive stops it: the matrix is not positive definite, and the order of the leading minor
 * that failed is returned (0 on success), as LAPACK's info reports it (a NaN pivot, like
 * LAPACK's unblocked factorisation, is no failure: the NaN spreads through the factor).
 *
 * solve: (U^T U) x = b for the banded Cholesky factor U (upper bandwidth u; entry U[i, j] at
 * ut[j * (u + 1) + u + i - j], the transpose of LAPACK's upper band storage) and b of shape
 * (n, c) in C order, in place: a forward pass U^T y = b and a backward pass U x = y, each
 * reading the factor once for all c columns. LAPACK's solve takes the columns one at a time
 * (two passes over the factor and a strided column each), which on a log of 10^6 fixes made
 * the noise replicates' solves several seconds. Only the buffer protocol of the Python C API
 * is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>

static void solve(const double *ut, double *x, int64_t n, int64_t u, int64_t c)
{
    const int64_t w = u + 1;
    for (int64_t j = 0; j < n; j++) {              /* U^T y = b: row j of U^T is column j of U */
        double *xj = x + j * c;
        const double *col = ut + j * w;             /* col[u + i - j] = U[i, j] */
        int64_t i0 = j - u > 0 ? j - u : 0;
        for (int64_t i = i0; i < j; i++) {
            const double f = col[u + i - j];
            const double *xi = x + i * c;
            for (int64_t k = 0; k < c; k++) xj[k] -= f * xi[k];
        }
        const double d = col[u];
        for (int64_t k = 0; k < c; k++) xj[k] /= d;
    }
    for (int64_t i = n - 1; i >= 0; i--) {         /* U x = y */
        double *xi = x + i * c;
        int64_t j1 = i + u < n - 1 ? i + u : n - 1;
        for (int64_t j = i + 1; j <= j1; j++) {
            const double f = ut[j * w + u + i - j];
            const double *xj = x + j * c;
            for (int64_t k = 0; k < c; k++) xi[k] -= f * xj[k];
        }
        const double d = ut[i * w + u];
        for (int64_t k = 0; k < c; k++) xi[k] /= d;
    }
}

static int64_t factor(double *ut, int64_t n, int64_t u)
{
    const int64_t w = u + 1;
    for (int64_t j = 0; j < n; j++) {
        double *cj = ut + j * w;                    /* cj[u + i - j] = U[i, j] */
        int64_t i0 = j - u > 0 ? j - u : 0;
        for (int64_t i = i0; i <= j; i++) {
            const double *ci = ut + i * w;          /* ci[u + k - i] = U[k, i] */
            double s = cj[u + i - j];               /* rows i0.. are in both columns */
            for (int64_t k = i0; k < i; k++) s -= ci[u + k - i] * cj[u + k - j];
            if (i < j) {
                cj[u + i - j] = s * (1.0 / ci[u]);   /* by the reciprocal, as LAPACK */
            } else {
                if (s <= 0.0) return j + 1;         /* a NaN goes on, as in LAPACK */
                cj[u] = sqrt(s);
            }
        }
    }
    return 0;
}

static PyObject *py_factor(PyObject *self, PyObject *args)
{
    PyObject *o_ut;
    long long n, u;
    if (!PyArg_ParseTuple(args, "OLL", &o_ut, &n, &u))
        return NULL;
    if (n < 1 || u < 0) {
        PyErr_SetString(PyExc_ValueError, "factor: bad sizes");
        return NULL;
    }
    Py_buffer vu;
    if (PyObject_GetBuffer(o_ut, &vu, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | PyBUF_WRITABLE) != 0)
        return NULL;
    if (vu.itemsize != 8 || vu.len != (Py_ssize_t)(n * (u + 1) * 8)) {
        PyBuffer_Release(&vu);
        PyErr_SetString(PyExc_ValueError, "factor: array of the wrong size or type");
        return NULL;
    }
    int64_t info;
    Py_BEGIN_ALLOW_THREADS
    info = factor(vu.buf, n, u);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&vu);
    return PyLong_FromLongLong(info);
}

static PyObject *py_solve(PyObject *self, PyObject *args)
{
    PyObject *o_ut, *o_x;
    long long n, u, c;
    if (!PyArg_ParseTuple(args, "OOLLL", &o_ut, &o_x, &n, &u, &c))
        return NULL;
    if (n < 1 || u < 0 || c < 1) {
        PyErr_SetString(PyExc_ValueError, "solve: bad sizes");
        return NULL;
    }
    Py_buffer vu, vx;
    if (PyObject_GetBuffer(o_ut, &vu, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT) != 0)
        return NULL;
    if (PyObject_GetBuffer(o_x, &vx, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | PyBUF_WRITABLE) != 0) {
        PyBuffer_Release(&vu);
        return NULL;
    }
    PyObject *result = NULL;
    if (vu.itemsize != 8 || vx.itemsize != 8 || vu.len != (Py_ssize_t)(n * (u + 1) * 8)
        || vx.len != (Py_ssize_t)(n * c * 8)) {
        PyErr_SetString(PyExc_ValueError, "solve: array of the wrong size or type");
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    solve(vu.buf, vx.buf, n, u, c);
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    PyBuffer_Release(&vu);
    PyBuffer_Release(&vx);
    return result;
}

static PyMethodDef methods[] = {
    {"factor", py_factor, METH_VARARGS,
     "factor(ut, n, u) -> int: ut (n, u + 1, float64, C order), A's upper band by columns "
     "(ut[j, u + i - j] = A[i, j]), replaced by U's (A = U^T U); 0, or the order of the first "
     "leading minor found not positive definite (ut then partly overwritten)."},
    {"solve", py_solve, METH_VARARGS,
     "solve(ut, x, n, u, c): x (n, c, float64, C order) <- (U^T U)^-1 x for the banded "
     "Cholesky factor U given as ut (n, u + 1): ut[j, u + i - j] = U[i, j]."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_band_solve", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__band_solve(void) { return PyModule_Create(&module); }

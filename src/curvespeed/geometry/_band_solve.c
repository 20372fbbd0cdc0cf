/* Compiled twin of scipy's cho_solve_banded for many right-hand sides stored by rows.
 *
 * Solves (U^T U) x = b for the banded Cholesky factor U (upper bandwidth u; entry U[i, j] at
 * ut[j * (u + 1) + u + i - j], the transpose of LAPACK's upper band storage) and b of shape
 * (n, c) in C order, in place: a forward pass U^T y = b and a backward pass U x = y, each
 * reading the factor once for all c columns. LAPACK's solve takes the columns one at a time
 * (two passes over the factor and a strided column each), which on a log of 10^6 fixes made
 * the noise replicates' solves several seconds. Only the buffer protocol of the Python C API
 * is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
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
    {"solve", py_solve, METH_VARARGS,
     "solve(ut, x, n, u, c): x (n, c, float64, C order) <- (U^T U)^-1 x for the banded "
     "Cholesky factor U given as ut (n, u + 1): ut[j, u + i - j] = U[i, j]."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_band_solve", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__band_solve(void) { return PyModule_Create(&module); }

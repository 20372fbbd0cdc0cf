/* Compiled twin of the ramp of the chosen smoothing scale (curvature._ramp, whose Python loop
 * stays as the reference): the largest function below the chosen level that changes by at
 * most step[i] between stations i and i + 1, by a forward and a backward pass. Each station
 * keeps its value unless the neighbour's plus the step is smaller (Python's min of the two
 * keeps the first unless the second is smaller: the same comparison, the same additions), so
 * the two agree to the last bit. The Python loop took 10 ms of a 10 km route's plan. Only the
 * buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>

static void ramp(double *out, const double *step, int64_t n)
{
    for (int64_t i = 1; i < n; i++) {
        const double v = out[i - 1] + step[i - 1];
        if (v < out[i])
            out[i] = v;
    }
    for (int64_t i = n - 2; i >= 0; i--) {
        const double v = out[i + 1] + step[i];
        if (v < out[i])
            out[i] = v;
    }
}

static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items)
{
    if (PyObject_GetBuffer(o, v, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT |
                           (writable ? PyBUF_WRITABLE : 0)) != 0)
        return -1;
    const char *f = v->format ? v->format : "B";
    const char k = f[f[0] == '<' || f[0] == '=' ? 1 : 0];
    if (k != 'd' || v->itemsize != 8 || v->len != items * 8) {
        PyErr_SetString(PyExc_ValueError, "ramp: array of the wrong size or type");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

static PyObject *py_ramp(PyObject *self, PyObject *args)
{
    PyObject *o_out, *o_step;
    long long n;
    if (!PyArg_ParseTuple(args, "OOL", &o_out, &o_step, &n))
        return NULL;
    if (n < 1) {
        PyErr_SetString(PyExc_ValueError, "ramp: no stations");
        return NULL;
    }
    Py_buffer out, step;
    if (get(o_out, &out, 1, n) != 0)
        return NULL;
    if (get(o_step, &step, 0, n - 1) != 0) {
        PyBuffer_Release(&out);
        return NULL;
    }
    ramp(out.buf, step.buf, n);
    PyBuffer_Release(&step);
    PyBuffer_Release(&out);
    Py_RETURN_NONE;
}

static PyMethodDef methods[] = {
    {"ramp", py_ramp, METH_VARARGS,
     "ramp(out, step, n): out (n,) float64, in place, <- the largest function below it that "
     "changes by at most step[i] (n - 1,) from station i to i + 1."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_scale_ramp", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__scale_ramp(void) { return PyModule_Create(&module); }

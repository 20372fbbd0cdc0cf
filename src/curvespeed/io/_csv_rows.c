/* Compiled twin of the CSV writers' rows (io._format.format_columns).
 *
 * rows(columns, precisions) joins the cells of every row with commas, each row ending in "\n".
 * A column is a float64 buffer printed with a fixed number of decimals (precision >= 0), or a
 * list of str written as they are (precision -1). A float is printed exactly as Python's
 * "%.<p>f" prints it, which is the correctly rounded decimal of the double's exact binary value
 * (ties to even), sign kept (-0.0 and tiny negatives give "-0.00..."): a double is m 2^e with an
 * integer m < 2^53, so x 10^p is the integer m 10^p shifted by e, which for p <= 17 fits in 128
 * bits; its integer part and the remainder of the shift give the rounding. Values outside that
 * (|x| >= 2^70, p > 17, nan, inf) go to the interpreter's own routine,
 * PyOS_double_to_string, the one "%" calls. Only the buffer protocol and the str API of the
 * Python C API are used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

typedef struct {
    char *buf;
    size_t len, cap;
} Text;

static int reserve(Text *t, size_t more)
{
    if (t->len + more <= t->cap)
        return 0;
    size_t cap = t->cap ? t->cap : 4096;
    while (cap < t->len + more)
        cap *= 2;
    char *buf = PyMem_Realloc(t->buf, cap);
    if (buf == NULL) {
        PyErr_NoMemory();
        return -1;
    }
    t->buf = buf;
    t->cap = cap;
    return 0;
}

static int put(Text *t, const char *s, size_t n)
{
    if (reserve(t, n) != 0)
        return -1;
    memcpy(t->buf + t->len, s, n);
    t->len += n;
    return 0;
}

#ifdef __SIZEOF_INT128__
typedef unsigned __int128 u128;

/* x printed with p decimals into out (at least 64 bytes); the length, or -1 where the 128-bit
 * path does not reach (the caller then asks the interpreter). */
static int fixed_exact(double x, int p, char *out)
{
    uint64_t bits;
    memcpy(&bits, &x, sizeof bits);
    const int biased = (int)((bits >> 52) & 0x7ff);
    if (biased == 0x7ff || p > 17)                    /* nan, inf */
        return -1;
    const uint64_t fraction = bits & ((UINT64_C(1) << 52) - 1);
    /* |x| = m 2^e, m < 2^53 (subnormals: no hidden bit) */
    const uint64_t m = biased ? fraction | (UINT64_C(1) << 52) : fraction;
    const int e = biased ? biased - 1075 : -1074;
    u128 scale = 1;
    for (int i = 0; i < p; i++)
        scale *= 10;
    u128 q;
    if (m == 0) {
        q = 0;
    } else if (e >= 0) {
        if (e > 127 - 53 - 57)                        /* m 2^e 10^p might not fit */
            return -1;
        q = ((u128)m << e) * scale;
    } else {
        const u128 n = (u128)m * scale;              /* < 2^53 10^17 < 2^110 */
        const int s = -e;
        if (s >= 112) {
            q = 0;                                    /* n < 2^110 <= half of 2^s: rounds down */
        } else {
            q = n >> s;
            const u128 rem = n - (q << s), half = (u128)1 << (s - 1);
            if (rem > half || (rem == half && (q & 1)))
                q += 1;
        }
    }
    char digits[48];
    int nd = 0;
    while (q >> 64) {                                 /* 128-bit division only where needed */
        digits[nd++] = (char)('0' + (int)(q % 10));
        q /= 10;
    }
    uint64_t low = (uint64_t)q;
    do {
        digits[nd++] = (char)('0' + (int)(low % 10));
        low /= 10;
    } while (low != 0);
    while (nd < p + 1)                                /* at least one digit before the point */
        digits[nd++] = '0';
    int k = 0;
    if (bits >> 63)
        out[k++] = '-';
    for (int i = nd - 1; i >= 0; i--) {
        out[k++] = digits[i];
        if (i == p && p > 0)
            out[k++] = '.';
    }
    return k;
}
#else
static int fixed_exact(double x, int p, char *out)
{
    (void)x; (void)p; (void)out;
    return -1;
}
#endif

static int put_float(Text *t, double x, int p)
{
    char cell[64];
    const int n = fixed_exact(x, p, cell);
    if (n >= 0)
        return put(t, cell, (size_t)n);
    char *s = PyOS_double_to_string(x, 'f', p, 0, NULL);
    if (s == NULL)
        return -1;
    const int rc = put(t, s, strlen(s));
    PyMem_Free(s);
    return rc;
}

static PyObject *py_fixed(PyObject *self, PyObject *args)
{
    double x;
    int p;
    if (!PyArg_ParseTuple(args, "di", &x, &p))
        return NULL;
    if (p < 0 || p > 40) {
        PyErr_SetString(PyExc_ValueError, "fixed: precision out of range");
        return NULL;
    }
    char cell[64];
    const int n = fixed_exact(x, p, cell);
    if (n < 0)
        Py_RETURN_NONE;                               /* the interpreter's routine prints it */
    return PyUnicode_FromStringAndSize(cell, n);
}

static PyObject *py_rows(PyObject *self, PyObject *args)
{
    PyObject *columns, *precisions;
    if (!PyArg_ParseTuple(args, "O!O!", &PyList_Type, &columns, &PyList_Type, &precisions))
        return NULL;
    const Py_ssize_t nc = PyList_GET_SIZE(columns);
    if (nc < 1 || PyList_GET_SIZE(precisions) != nc) {
        PyErr_SetString(PyExc_ValueError, "rows: one precision per column, at least one column");
        return NULL;
    }
    Py_buffer *views = PyMem_Calloc((size_t)nc, sizeof(Py_buffer));
    int *prec = PyMem_Calloc((size_t)nc, sizeof(int));
    PyObject *result = NULL;
    Text t = {NULL, 0, 0};
    Py_ssize_t got = 0, n_rows = -1;
    if (views == NULL || prec == NULL) {
        PyErr_NoMemory();
        goto done;
    }
    for (; got < nc; got++) {
        PyObject *col = PyList_GET_ITEM(columns, got);
        const long p = PyLong_AsLong(PyList_GET_ITEM(precisions, got));
        if (p == -1 && PyErr_Occurred())
            goto done;
        if (p < -1 || p > 40) {
            PyErr_SetString(PyExc_ValueError, "rows: precision out of range");
            goto done;
        }
        prec[got] = (int)p;
        Py_ssize_t size;
        if (p == -1) {
            if (!PyList_Check(col)) {
                PyErr_SetString(PyExc_TypeError, "rows: a text column must be a list of str");
                goto done;
            }
            size = PyList_GET_SIZE(col);
        } else {
            if (PyObject_GetBuffer(col, &views[got], PyBUF_C_CONTIGUOUS | PyBUF_FORMAT) != 0)
                goto done;
            const char *f = views[got].format;
            const char k = f ? f[f[0] == '<' || f[0] == '=' ? 1 : 0] : 'B';
            if (k != 'd' || views[got].itemsize != 8) {
                PyErr_SetString(PyExc_TypeError, "rows: a number column must be float64");
                got++;
                goto done;
            }
            size = views[got].len / 8;
        }
        if (n_rows >= 0 && size != n_rows) {
            PyErr_SetString(PyExc_ValueError, "rows: columns of different lengths");
            got += p != -1;
            goto done;
        }
        n_rows = size;
    }
    if (reserve(&t, (size_t)n_rows * (size_t)nc * 12 + 1) != 0)
        goto done;
    for (Py_ssize_t i = 0; i < n_rows; i++) {
        for (Py_ssize_t j = 0; j < nc; j++) {
            if (j > 0 && put(&t, ",", 1) != 0)
                goto done;
            if (prec[j] >= 0) {
                if (put_float(&t, ((const double *)views[j].buf)[i], prec[j]) != 0)
                    goto done;
                continue;
            }
            PyObject *cell = PyList_GET_ITEM(PyList_GET_ITEM(columns, j), i);
            if (!PyUnicode_Check(cell)) {
                PyErr_SetString(PyExc_TypeError, "rows: a text cell is not a str");
                goto done;
            }
            Py_ssize_t n;
            const char *s = PyUnicode_AsUTF8AndSize(cell, &n);
            if (s == NULL || put(&t, s, (size_t)n) != 0)
                goto done;
        }
        if (put(&t, "\n", 1) != 0)
            goto done;
    }
    result = PyUnicode_DecodeUTF8(t.buf ? t.buf : "", (Py_ssize_t)t.len, "strict");
done:
    for (Py_ssize_t j = 0; j < got; j++)
        if (prec[j] >= 0)
            PyBuffer_Release(&views[j]);
    PyMem_Free(views);
    PyMem_Free(prec);
    PyMem_Free(t.buf);
    return result;
}

static PyMethodDef methods[] = {
    {"rows", py_rows, METH_VARARGS,
     "rows(columns, precisions) -> str: every row's cells joined by commas, each row ending in "
     "a newline. columns: list of float64 buffers (precision >= 0: printed as '%.<p>f' prints "
     "them) or lists of str (precision -1: written as they are), all of one length."},
    {"fixed", py_fixed, METH_VARARGS,
     "fixed(x, p) -> str or None: x with p decimals by the exact 128-bit path, None where that "
     "path hands the value to the interpreter (for tests)."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_csv_rows", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__csv_rows(void) { return PyModule_Create(&module); }

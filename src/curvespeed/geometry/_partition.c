/* Compiled optimal partitioning of curvespeed.geometry.alignment.
 *
 * A line-by-line twin of alignment.py's _partition and _LineFits.cost (which stay as the
 * reference the tests compare against): the same operations in the same order, so the
 * boundaries agree exactly. Only the buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

typedef struct { const double *c0, *c1, *c2, *cy, *cxy, *cyy; } sums_t;

/* Residual sum of squares of the least-squares line through [a, b) (_LineFits.cost). */
static double cost(const sums_t *s, int64_t a, int64_t b)
{
    double n = s->c0[b] - s->c0[a], sx = s->c1[b] - s->c1[a], sxx = s->c2[b] - s->c2[a];
    double sy = s->cy[b] - s->cy[a], sxy = s->cxy[b] - s->cxy[a], syy = s->cyy[b] - s->cyy[a];
    double den = n * sxx - sx * sx;
    double slope = den > 0 ? (n * sxy - sx * sy) / den : 0.0;
    double icpt = (sy - slope * sx) / n;
    double rss = (syy - 2 * slope * sxy - 2 * icpt * sy + slope * slope * sxx
                  + 2 * slope * icpt * sx + icpt * icpt * n);
    return rss > 0.0 ? rss : 0.0;
}

/* Lower bound of x in the ascending a[0:len] (numpy searchsorted, side left / right). */
static int64_t search(const int64_t *a, int64_t len, int64_t x, int right)
{
    int64_t lo = 0, hi = len;
    while (lo < hi) {
        int64_t mid = lo + (hi - lo) / 2;
        if (right ? a[mid] <= x : a[mid] < x) lo = mid + 1; else hi = mid;
    }
    return lo;
}

static int partition(const sums_t *s, int64_t n, int64_t gap, double beta, double scale,
                     int64_t minlen, int64_t maxseg, int64_t *prev)
{
    double *best = malloc((size_t)(n + 1) * sizeof(double));
    double *total = malloc((size_t)(n + 1) * sizeof(double));
    int64_t *cand = malloc((size_t)(n + 2) * sizeof(int64_t));
    int64_t *next = malloc((size_t)(n + 2) * sizeof(int64_t));
    if (!best || !total || !cand || !next) {
        free(best); free(total); free(cand); free(next);
        return -1;
    }
    for (int64_t j = 0; j <= n; j++) { best[j] = INFINITY; prev[j] = 0; }
    best[0] = -beta;
    int64_t len = 1;
    cand[0] = 0;
    for (int64_t j = minlen; j <= n; j++) {
        int64_t first = search(cand, len, j - maxseg, 0);
        int64_t ready = search(cand, len, j - minlen, 1);
        int64_t m = 0;
        if (ready > first) {
            int64_t hi = j == n ? j : j - gap;
            for (int64_t k = first; k < ready; k++) {
                int64_t i = cand[k];
                int64_t lo = i == 0 ? 0 : i + gap;
                total[k] = best[i] + cost(s, lo, hi) * scale + beta;
                if (k == first || total[k] < total[m]) m = k;     /* first of the smallest */
            }
            best[j] = total[m];
            prev[j] = cand[m];
            int64_t out = 0;
            for (int64_t k = first; k < ready; k++)
                if (total[k] - beta <= best[j]) next[out++] = cand[k];
            for (int64_t k = ready; k < len; k++) next[out++] = cand[k];
            next[out++] = j;
            int64_t *t = cand; cand = next; next = t;
            len = out;
        } else {
            int64_t out = 0;
            for (int64_t k = first; k < len; k++) next[out++] = cand[k];
            next[out++] = j;
            int64_t *t = cand; cand = next; next = t;
            len = out;
        }
    }
    free(best); free(total); free(cand); free(next);
    return 0;
}

static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, int itemsize)
{
    if (PyObject_GetBuffer(o, v, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT |
                           (writable ? PyBUF_WRITABLE : 0)) != 0)
        return -1;
    if (v->itemsize != itemsize || v->len != items * itemsize) {
        PyErr_SetString(PyExc_ValueError, "partition: array of the wrong size or type");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

static PyObject *py_partition(PyObject *self, PyObject *args)
{
    PyObject *o[7];
    long long n, gap, minlen, maxseg;
    double beta, scale;
    if (!PyArg_ParseTuple(args, "OOOOOOLLddLLO", &o[0], &o[1], &o[2], &o[3], &o[4], &o[5], &n,
                          &gap, &beta, &scale, &minlen, &maxseg, &o[6]))
        return NULL;
    if (n < 1 || gap < 0 || minlen < 1) {
        PyErr_SetString(PyExc_ValueError, "partition: bad sizes");
        return NULL;
    }
    Py_buffer v[7];
    int got = 0;
    PyObject *result = NULL;
    for (; got < 6; got++)
        if (get(o[got], &v[got], 0, (Py_ssize_t)n + 1, 8) != 0) goto done;
    if (get(o[6], &v[6], 1, (Py_ssize_t)n + 1, 8) != 0) goto done;
    got = 7;
    sums_t s = {v[0].buf, v[1].buf, v[2].buf, v[3].buf, v[4].buf, v[5].buf};
    int rc;
    Py_BEGIN_ALLOW_THREADS
    rc = partition(&s, n, gap, beta, scale, minlen, maxseg, v[6].buf);
    Py_END_ALLOW_THREADS
    if (rc != 0) { PyErr_NoMemory(); goto done; }
    Py_INCREF(Py_None);
    result = Py_None;
done:
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

static PyMethodDef methods[] = {
    {"partition", py_partition, METH_VARARGS,
     "partition(c0, c1, c2, cy, cxy, cyy, n, gap, beta, scale, minlen, maxseg, prev): "
     "optimal partitioning's back pointers into prev (int64, n + 1)."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_partition", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__partition(void) { return PyModule_Create(&module); }

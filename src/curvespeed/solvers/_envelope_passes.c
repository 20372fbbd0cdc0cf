/* Compiled forward and backward passes of curvespeed.solvers.envelope.
 *
 * A line-by-line twin of envelope.py's _Nodes.bounds, _upper_root, _largest_cubic_root,
 * _reach_forward, _reach_backward, _forward_pass and _backward_pass (which stay as the reference
 * the tests compare against): the same operations in the same order, so the answers agree to
 * the last bit. Also the twin of problem.SpeedProblem.lateral_ceiling_b's bisection (its
 * accel_bounds in numpy's operations from _accel_bounds.h, shared with _window_qp.c). Only the buffer protocol of the Python C API is used (no numpy
 * headers).
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "_accel_bounds.h"

typedef struct {
    const double *lat1, *lat0, *n0, *n1, *r0, *mux, *muy;   /* per node */
    double cd, a_acc, a_dec, a_lat, pm, h;
} nodes_t;

static inline double pmax(double a, double b) { return b > a ? b : a; }   /* Python max(a, b) */
static inline double pmin(double a, double b) { return b < a ? b : a; }   /* Python min(a, b) */

static void bounds(const nodes_t *nd, int64_t k, double b, double *lo, double *hi)
{
    double y = nd->lat1[k] * b - nd->lat0[k];
    double r = y > 0.0 ? y / nd->a_lat : 0.0;
    double c = r < 1.0 ? sqrt(1.0 - r * r) : 0.0;
    double nrm = nd->n0[k] + nd->n1[k] * b;
    double w2 = nrm * nrm - pow(y / nd->muy[k], 2.0);
    double w = w2 > 0.0 ? nd->mux[k] * sqrt(w2) : 0.0;
    double res = nd->r0[k] + nd->cd * b;
    *lo = pmax(-nd->a_dec * c, -w - res);
    *hi = pmin(nd->a_acc * c, w - res);
    if (nd->pm != INFINITY && b > 0.0)
        *hi = pmin(*hi, nd->pm / sqrt(b) - res);
}

/* Larger root of qa x^2 + qb x + qc (qa > 0); returns 0 when there is none. */
static int upper_root(double qa, double qb, double qc, double *root)
{
    double disc = qb * qb - 4.0 * qa * qc;
    if (disc < 0.0) return 0;
    double sq = sqrt(disc), x1, x2;
    if (qb >= 0.0) {
        x1 = (-qb - sq) / (2.0 * qa);
        x2 = (sq + qb != 0.0) ? (2.0 * qc) / (-qb - sq) : x1;
    } else {
        x2 = (-qb + sq) / (2.0 * qa);
        x1 = (2.0 * qc) / (-qb + sq);
    }
    *root = pmax(x1, x2);
    return 1;
}

static double largest_cubic_root(double p, double q)
{
    double disc = pow(q / 2.0, 2.0) + pow(p / 3.0, 3.0);
    if (disc >= 0.0) {
        double sq = sqrt(disc);
        return copysign(pow(fabs(-q / 2.0 + sq), 1.0 / 3.0), -q / 2.0 + sq)
               + copysign(pow(fabs(-q / 2.0 - sq), 1.0 / 3.0), -q / 2.0 - sq);
    }
    double m = 2.0 * sqrt(-p / 3.0);
    double arg = pmax(-1.0, pmin(1.0, 3.0 * q / (p * m)));
    return m * cos(acos(arg) / 3.0);
}

static double reach_forward(const nodes_t *nd, int64_t j, double b_prev)
{
    double h = nd->h, best = INFINITY, root;
    double lat1 = nd->lat1[j], lat0 = nd->lat0[j];
    double b_free = b_prev + nd->a_acc / h;
    if (lat1 * b_free - lat0 > 0.0) {
        double u = h / nd->a_acc, w = lat1 / nd->a_lat, w0 = -lat0 / nd->a_lat;
        if (upper_root(u * u + w * w, 2.0 * (w * w0 - u * u * b_prev),
                       u * u * b_prev * b_prev + w0 * w0 - 1.0, &root) && root >= b_prev)
            best = root;
    } else {
        best = b_free;
    }
    double t1 = h + nd->cd, t0 = nd->r0[j] - h * b_prev;
    double mx2 = nd->mux[j] * nd->mux[j], my2 = nd->muy[j] * nd->muy[j];
    double n0 = nd->n0[j], n1 = nd->n1[j];
    if (upper_root(t1 * t1 / mx2 + lat1 * lat1 / my2 - n1 * n1,
                   2.0 * (t1 * t0 / mx2 - lat1 * lat0 / my2 - n1 * n0),
                   t0 * t0 / mx2 + lat0 * lat0 / my2 - n0 * n0, &root)
        && t1 * root + t0 >= 0.0 && root < best)
        best = root;
    if (nd->pm != INFINITY) {
        double u = largest_cubic_root(t0 / t1, -nd->pm / t1);
        if (u * u < best) best = u * u;
    }
    return best;
}

static double reach_backward(const nodes_t *nd, int64_t i, double b_next)
{
    double h = nd->h, best = INFINITY, root;
    double lat1 = nd->lat1[i], lat0 = nd->lat0[i];
    double b_free = b_next + nd->a_dec / h;
    if (lat1 * b_free - lat0 > 0.0) {
        double u = h / nd->a_dec, w = lat1 / nd->a_lat, w0 = -lat0 / nd->a_lat;
        if (upper_root(u * u + w * w, 2.0 * (w * w0 - u * u * b_next),
                       u * u * b_next * b_next + w0 * w0 - 1.0, &root) && root >= b_next)
            best = root;
    } else {
        best = b_free;
    }
    double t1 = nd->cd - h, t0 = nd->r0[i] + h * b_next;
    double mx2 = nd->mux[i] * nd->mux[i], my2 = nd->muy[i] * nd->muy[i];
    double n0 = nd->n0[i], n1 = nd->n1[i];
    if (upper_root(t1 * t1 / mx2 + lat1 * lat1 / my2 - n1 * n1,
                   2.0 * (t1 * t0 / mx2 - lat1 * lat0 / my2 - n1 * n0),
                   t0 * t0 / mx2 + lat0 * lat0 / my2 - n0 * n0, &root)
        && t1 * root + t0 <= 0.0 && root < best)
        best = root;
    return best;
}

static void forward_pass(const nodes_t *nd, const double *ceiling, double b0,
                         const int64_t *order, int64_t cnt, double *out)
{
    double b = out[0] = b0, lo, hi;
    for (int64_t m = 1; m < cnt; m++) {
        int64_t i = order[m - 1], j = order[m];
        bounds(nd, i, b, &lo, &hi);
        double nxt = pmin(ceiling[m], b + hi / nd->h);
        double reach = reach_forward(nd, j, b);
        if (reach < nxt) nxt = reach;
        b = out[m] = nxt > 0.0 ? nxt : 0.0;
    }
}

static void backward_pass(const nodes_t *nd, const double *ceiling, double b_last,
                          const int64_t *order, int64_t cnt, double *out)
{
    double b = out[cnt - 1] = b_last, lo, hi;
    for (int64_t m = cnt - 2; m >= 0; m--) {
        int64_t i = order[m], j = order[m + 1];
        bounds(nd, j, b, &lo, &hi);
        double prv = pmin(ceiling[m], b - lo / nd->h);
        double reach = reach_backward(nd, i, b);
        if (reach < prv) prv = reach;
        b = out[m] = prv > 0.0 ? prv : 0.0;
    }
}

static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, int is_int)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) != 0) return -1;
    int ok = v->itemsize == 8 && (items < 0 || v->len == items * 8)
             && (is_int ? (strcmp(v->format, "q") == 0 || strcmp(v->format, "l") == 0)
                        : strcmp(v->format, "d") == 0);
    if (!ok) {
        PyErr_SetString(PyExc_ValueError, "envelope passes: an array has the wrong type or "
                        "length");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

/* passes(direction, lat1, lat0, n0, n1, r0, mux, muy, (cd, a_acc, a_dec, a_lat, pm, h),
 *        ceiling, b_end, order, out): direction 1 forward from b_end = b0, -1 backward to
 *        b_end = b_last; ceiling and out are indexed by position in order; mux, muy are the
 *        friction coefficients along and across the path at each node. */
static PyObject *py_pass(PyObject *self, PyObject *args)
{
    (void)self;
    int direction;
    PyObject *o[11];
    nodes_t nd;
    double b_end;
    if (!PyArg_ParseTuple(args, "iOOOOOOO(dddddd)OdOO", &direction, &o[0], &o[1], &o[2], &o[3],
                          &o[4], &o[8], &o[9], &nd.cd, &nd.a_acc, &nd.a_dec, &nd.a_lat,
                          &nd.pm, &nd.h, &o[5], &b_end, &o[6], &o[7]))
        return NULL;
    Py_buffer v[10];
    int got = 0;
    PyObject *result = NULL;
    if (get(o[0], &v[0], 0, -1, 0) != 0) return NULL;
    got = 1;
    Py_ssize_t n = v[0].len / 8;
    for (; got < 5; got++)
        if (get(o[got], &v[got], 0, n, 0) != 0) goto done;
    if (get(o[6], &v[5], 0, -1, 1) != 0) goto done;        /* order */
    got = 6;
    Py_ssize_t cnt = v[5].len / 8;
    if (get(o[5], &v[6], 0, cnt, 0) != 0) goto done;       /* ceiling */
    got = 7;
    if (get(o[7], &v[7], 1, cnt, 0) != 0) goto done;       /* out */
    got = 8;
    for (; got < 10; got++)                                 /* mux, muy */
        if (get(o[got], &v[got], 0, n, 0) != 0) goto done;
    const int64_t *order = v[5].buf;
    for (Py_ssize_t k = 0; k < cnt; k++) {
        if (order[k] < 0 || order[k] >= n) {
            PyErr_SetString(PyExc_ValueError, "envelope passes: node index out of range");
            goto done;
        }
    }
    if (cnt < 1) { PyErr_SetString(PyExc_ValueError, "envelope passes: no nodes"); goto done; }
    nd.lat1 = v[0].buf; nd.lat0 = v[1].buf; nd.n0 = v[2].buf; nd.n1 = v[3].buf; nd.r0 = v[4].buf;
    nd.mux = v[8].buf; nd.muy = v[9].buf;
    Py_BEGIN_ALLOW_THREADS
    if (direction > 0)
        forward_pass(&nd, v[6].buf, b_end, order, cnt, v[7].buf);
    else
        backward_pass(&nd, v[6].buf, b_end, order, cnt, v[7].buf);
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

typedef struct {
    phys_t phys;                    /* SpeedProblem.accel_bounds' inputs but the power's */
    double pm;
    int power;
} ceiling_t;

/* Is node k's acceleration interval at squared speed b non-empty?
 * (SpeedProblem.accel_bounds: lo <= hi) */
static int interval_open(const ceiling_t *c, Py_ssize_t k, double b)
{
    double lo, hi;
    double res = accel_bounds(&c->phys, k, b, &lo, &hi);
    if (c->power) hi = np_min(hi, c->pm / sqrt(np_max(b, 0.0)) - res);
    return lo <= hi;
}

/* ceiling_bisect(kappa, cos_bank, sin_bank, cos_grade, sin_grade, mu_long, mu_lat,
 *                (g, a_lat, a_acc, a_dec, drag, roll, pm), power, lo, hi, iterations,
 *                capped_done): lo and hi bisected in place, every node at once, stopping
 *                early (with capped_done) once every bracket is within 1e-12 of its top. */
static PyObject *py_ceiling(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[9];
    ceiling_t c;
    int iterations, capped_done;
    if (!PyArg_ParseTuple(args, "OOOOOOO(ddddddd)pOOip", &o[0], &o[1], &o[2], &o[3], &o[4],
                          &o[5], &o[6], &c.phys.g, &c.phys.a_lat, &c.phys.a_acc, &c.phys.a_dec,
                          &c.phys.drag, &c.phys.rr, &c.pm, &c.power, &o[7], &o[8], &iterations, &capped_done))
        return NULL;
    Py_buffer v[9];
    int got = 0;
    PyObject *result = NULL;
    if (get(o[0], &v[0], 0, -1, 0) != 0) return NULL;
    got = 1;
    Py_ssize_t n = v[0].len / 8;
    for (; got < 9; got++)
        if (get(o[got], &v[got], got >= 7, n, 0) != 0) goto done;
    c.phys.kappa = v[0].buf; c.phys.cos_bank = v[1].buf; c.phys.sin_bank = v[2].buf;
    c.phys.cos_grade = v[3].buf; c.phys.sin_grade = v[4].buf; c.phys.mu_long = v[5].buf;
    c.phys.mu_lat = v[6].buf;
    double *lo = v[7].buf, *hi = v[8].buf;
    Py_BEGIN_ALLOW_THREADS
    for (int it = 0; it < iterations && n > 0; it++) {
        int narrow = 1;
        for (Py_ssize_t k = 0; k < n; k++) {
            double mid = 0.5 * (lo[k] + hi[k]);
            if (interval_open(&c, k, mid)) lo[k] = mid;
            else hi[k] = mid;
            narrow = narrow && hi[k] - lo[k] <= 1e-12 * np_max(hi[k], 1.0);
        }
        if (capped_done && narrow) break;
    }
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

static PyMethodDef methods[] = {
    {"run_pass", py_pass, METH_VARARGS,
     "run_pass(direction, lat1, lat0, n0, n1, r0, mux, muy, (cd, a_acc, a_dec, a_lat, pm, h), "
     "ceiling, b_end, order, out): one forward (+1) or backward (-1) pass into out."},
    {"ceiling_bisect", py_ceiling, METH_VARARGS,
     "ceiling_bisect(kappa, cos_bank, sin_bank, cos_grade, sin_grade, mu_long, mu_lat, "
     "(g, a_lat, a_acc, a_dec, drag, roll, pm), power, lo, hi, iterations, capped_done): "
     "SpeedProblem.lateral_ceiling_b's bisection, lo and hi in place."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_envelope_passes", NULL, -1,
                                    methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__envelope_passes(void) { return PyModule_Create(&module); }

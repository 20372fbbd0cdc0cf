/* The verifier's verdict on a receding-horizon window's profile in one compiled pass: the twin
 * of curvespeed.verify.verify_profile(problem, b, tolerance, check_jerk=True, labels=False,
 * measure_lateral_jerk=False) with curvespeed.profile.derive, for an open window without a
 * power limit, a lateral jerk bound or a step next to rest (the numpy code stays the reference
 * the tests compare against, and the verdict on any other window, and the words of every
 * refusal). The same operations in the same order (built with -ffp-contract=off; numpy's
 * maximum and minimum propagate NaN, Python's min and max keep their first argument unless
 * another is smaller or larger; np.hypot is the C library's hypot), so the derived speeds,
 * accelerations and times and each limit's largest use are the numpy code's to the last bit.
 *
 * Only the buffer protocol of the Python C API is used.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static inline double np_max(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a > b ? a : b);
}

static inline double np_min(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a < b ? a : b);
}

static inline double py_max(double a, double b) { return b > a ? b : a; }
static inline double py_min(double a, double b) { return b < a ? b : a; }

/* An array of exactly `items` entries (outputs: at least) of kind 'q' (int64) or 'd'. */
static int get(PyObject *o, Py_buffer *v, int writable, Py_ssize_t items, char kind)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) != 0) return -1;
    const char *f = v->format;
    int fmt_ok = kind == 'q' ? (strcmp(f, "q") == 0 || (strcmp(f, "l") == 0 && sizeof(long) == 8))
                             : strcmp(f, "d") == 0;
    int len_ok = writable ? v->len >= items * 8 : v->len == items * 8;
    if (!fmt_ok || v->itemsize != 8 || !len_ok) {
        PyErr_SetString(PyExc_ValueError, "window_check kernel: an array has the wrong type "
                        "or length");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

static Py_ssize_t length(PyObject *o)
{
    Py_buffer b;
    if (PyObject_GetBuffer(o, &b, PyBUF_C_CONTIGUOUS) != 0) return -1;
    Py_ssize_t n = b.len / 8;
    PyBuffer_Release(&b);
    return n;
}

typedef struct {
    const double *b, *kappa, *cos_bank, *sin_bank, *cos_grade, *sin_grade, *mu_long, *mu_lat;
    const double *cap_b, *f_start, *f_end, *time_coef;
    double ds, g, a_lat, a_acc, a_dec, drag, rr;
} window_t;

/* per_step_at: the comfort ellipse's and the friction ellipse's use at node k */
static void uses_at(const window_t *w, Py_ssize_t k, double a, double *comfort, double *grip)
{
    double b = w->b[k];
    double y = w->kappa[k] * b * w->cos_bank[k] - w->g * w->sin_bank[k];
    double lat_use = np_max(y, 0.0) / w->a_lat;
    double normal = w->g * w->cos_grade[k] * w->cos_bank[k] + w->kappa[k] * b * w->sin_bank[k];
    double res = w->g * w->sin_grade[k] + w->drag * b + w->rr * w->g * w->cos_grade[k];
    double cap_a = a >= 0.0 ? w->a_acc : w->a_dec;
    *comfort = hypot(a / cap_a, lat_use);
    double tyre_long = a + res;
    *grip = hypot(tyre_long / w->mu_long[k], y / w->mu_lat[k]) / normal;
}

#define N_ARRAYS 21

/* check(b, kappa_abs, cos_bank, sin_bank, cos_grade, sin_grade, mu_long, mu_lat, cap_b,
 *       accel_factor_start, accel_factor_end, time_coef, t_node, t_prev, t_next, t_weights,
 *       t_scale, reserve, speed_out, accel_out, time_out, peaks_out, scalars) -> ok
 * scalars: (ds, g, a_lat, a_acc, a_dec, drag, rr, jerk, a0, a0_tolerance, tolerance, b_start,
 *           b_end (NaN: none), brake_b (NaN: no end reserve));
 * peaks_out: the largest use of the speed cap, lateral comfort, comfort ellipse, friction
 * ellipse, jerk and end reserve (0 without one) */
static PyObject *py_check(PyObject *self, PyObject *args)
{
    (void)self;
    PyObject *o[N_ARRAYS + 1];
    double s[14];
    if (!PyArg_ParseTuple(args, "OOOOOOOOOOOOOOOOOOOOOO(dddddddddddddd)", &o[0], &o[1], &o[2],
                          &o[3], &o[4], &o[5], &o[6], &o[7], &o[8], &o[9], &o[10], &o[11],
                          &o[12], &o[13], &o[14], &o[15], &o[16], &o[17], &o[18], &o[19],
                          &o[20], &o[21], &s[0], &s[1], &s[2], &s[3], &s[4], &s[5], &s[6],
                          &s[7], &s[8], &s[9], &s[10], &s[11], &s[12], &s[13]))
        return NULL;
    Py_ssize_t n = length(o[0]), nt = length(o[12]), nr = length(o[17]) / 2;
    if (n < 0 || nt < 0 || nr < 0) return NULL;
    if (n < 2) {
        PyErr_SetString(PyExc_ValueError, "window_check kernel: fewer than two stations");
        return NULL;
    }
    const Py_ssize_t items[N_ARRAYS + 1] = {n, n, n, n, n, n, n, n, n, n - 1, n - 1, n - 1,
                                            nt, nt, nt, 3 * nt, nt, 2 * nr, n, n, n, 6};
    Py_buffer v[N_ARRAYS + 1];
    int got;
    PyObject *result = NULL;
    double *work = NULL;
    for (got = 0; got < N_ARRAYS + 1; got++)
        if (get(o[got], &v[got], got >= 18, items[got], got >= 12 && got <= 14 ? 'q' : 'd'))
            goto done;
    {
        const int64_t *tn = v[12].buf, *tp = v[13].buf, *tx = v[14].buf;
        for (Py_ssize_t i = 0; i < nt; i++) {
            if (tn[i] < 0 || tn[i] >= n || tp[i] < 0 || tp[i] >= n || tx[i] < 0 || tx[i] >= n) {
                PyErr_SetString(PyExc_ValueError, "window_check kernel: a station out of range");
                goto done;
            }
        }
        work = malloc((size_t)n * 6 * sizeof(double));
        if (!work) {
            PyErr_NoMemory();
            goto done;
        }
        double *bm = work, *a_first = work + n, *a_last = work + 2 * n, *tau = work + 3 * n;
        double *cm = work + 4 * n, *gm = work + 5 * n;
        const double *braw = v[0].buf;
        for (Py_ssize_t k = 0; k < n; k++) bm[k] = np_max(braw[k], 0.0);
        window_t w = {bm, v[1].buf, v[2].buf, v[3].buf, v[4].buf, v[5].buf, v[6].buf, v[7].buf,
                      v[8].buf, v[9].buf, v[10].buf, v[11].buf, s[0], s[1], s[2], s[3], s[4],
                      s[5], s[6]};
        double *speed = v[18].buf, *acc = v[19].buf, *t = v[20].buf, *peaks = v[21].buf;
        double ds = s[0], jerk_bound = s[7], a0 = s[8], a0_tol = s[9], tol = s[10];
        double b_start = s[11], b_end = s[12], brake_b = s[13];
        int has_reserve = !isnan(brake_b);
        /* derive: speeds, step accelerations at both ends, times */
        double clock = 0.0;
        t[0] = 0.0;
        for (Py_ssize_t k = 0; k < n; k++) speed[k] = sqrt(bm[k]);
        for (Py_ssize_t j = 0; j + 1 < n; j++) {
            double a_step = (bm[j + 1] - bm[j]) / (2.0 * ds);
            a_first[j] = a_step * w.f_start[j];
            a_last[j] = a_step * w.f_end[j];
            double vsum = speed[j] + speed[j + 1];
            double dt = vsum > 0.0 ? w.time_coef[j] * ds / vsum : INFINITY;
            clock = j == 0 ? dt : clock + dt;
            t[j + 1] = clock;
        }
        /* node_jerk_time */
        for (Py_ssize_t k = 0; k < n; k++) tau[k] = INFINITY;
        const double *tw = v[15].buf, *tsc = v[16].buf;
        for (Py_ssize_t i = 0; i < nt; i++) {
            double r = tw[3 * i] * speed[tp[i]] + tw[3 * i + 1] * speed[tn[i]]
                       + tw[3 * i + 2] * speed[tx[i]];
            double term = tsc[i] == 0.0 ? 0.0 : (r > 0.0 ? tsc[i] * ds / r : INFINITY);
            tau[tn[i]] = np_min(tau[tn[i]], term);
        }
        double a_start = py_min(py_max(a_first[0], a0 - a0_tol), a0 + a0_tol);
        for (Py_ssize_t k = 0; k < n; k++) {
            double before = k == 0 ? a_start : a_last[k - 1];
            double after = k + 1 < n ? a_first[k] : (has_reserve ? a_last[n - 2] : 0.0);
            acc[k] = k == 0 ? after : k + 1 == n ? before : 0.5 * (before + after);
            double change = after - before;
            /* a change within round-off is none: profile.ACCEL_ROUND_OFF_MPS2 */
            double jerk = fabs(change) <= 1e-9 ? 0.0
                        : (isfinite(tau[k]) && tau[k] > 0.0 ? change / tau[k] : INFINITY);
            tau[k] = np_max(fabs(jerk), 0.0) / jerk_bound;      /* the jerk's use, from here on */
        }
        /* the ellipses' uses per step, at both its nodes */
        for (Py_ssize_t j = 0; j + 1 < n; j++) {
            double c0, g0, c1, g1;
            uses_at(&w, j, a_first[j], &c0, &g0);
            uses_at(&w, j + 1, a_last[j], &c1, &g1);
            cm[j] = np_max(c0, c1);
            gm[j] = np_max(g0, g1);
        }
        double limit = 1.0 + tol;
        int ok = 1;
        double peak[6];
        for (int i = 0; i < 6; i++) peak[i] = -INFINITY;
        for (Py_ssize_t k = 0; k < n; k++) {
            double b = bm[k], cap = w.cap_b[k];
            double y = w.kappa[k] * b * w.cos_bank[k] - w.g * w.sin_bank[k];
            double use[5];
            use[0] = cap > 0.0 ? sqrt(b / cap) : (b > 0.0 ? INFINITY : 1.0);
            use[1] = np_max(y, 0.0) / w.a_lat;
            use[2] = k == 0 ? cm[0] : k + 1 == n ? cm[n - 2] : np_max(cm[k - 1], cm[k]);
            use[3] = k == 0 ? gm[0] : k + 1 == n ? gm[n - 2] : np_max(gm[k - 1], gm[k]);
            use[4] = tau[k];
            for (int i = 0; i < 5; i++) {
                peak[i] = k == 0 ? use[i] : np_max(peak[i], use[i]);
                ok &= !(use[i] > limit);
            }
        }
        peak[5] = 0.0;
        if (has_reserve) {              /* SpeedProblem.end_reserve_use */
            const double *cd = v[17].buf;
            double a_end = w.f_end[n - 2] * (bm[n - 1] - bm[n - 2]) / (2.0 * ds), need = 0.0;
            for (Py_ssize_t i = 0; i < nr; i++) {
                double here = bm[n - 1] + cd[2 * i] * a_end + cd[2 * i + 1];
                need = i == 0 ? here : py_max(need, here);
            }
            double use = brake_b > 0.0 ? need / brake_b : (need > 0.0 ? INFINITY : 0.0);
            peak[5] = n > 1 ? np_max(0.0, use) : use;
            ok &= !(use > limit);
        }
        if (!isnan(b_start))
            ok &= !(fabs(sqrt(bm[0]) - sqrt(b_start)) > 1e-6 + tol * sqrt(b_start));
        if (!isnan(b_end))
            ok &= !(fabs(sqrt(bm[n - 1]) - sqrt(b_end)) > 1e-6 + tol * sqrt(b_end));
        memcpy(peaks, peak, sizeof(peak));
        result = PyBool_FromLong(ok);
    }
done:
    free(work);
    for (int j = 0; j < got; j++) PyBuffer_Release(&v[j]);
    return result;
}

static PyMethodDef methods[] = {
    {"check", py_check, METH_VARARGS,
     "check(b, ..., scalars) -> ok: verify.verify_profile's verdict on an open window without "
     "power, lateral jerk bound or a step next to rest, with profile.derive's speeds, "
     "accelerations and times and each limit's largest use written out."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_window_check", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__window_check(void) { return PyModule_Create(&module); }

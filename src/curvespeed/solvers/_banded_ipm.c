/* Compiled kernel of curvespeed.solvers.banded_ipm: Mehrotra predictor-corrector iterations
 * for  min x'Px/2 + q'x  s.t.  lo <= Ax <= up  when P + A'DA is banded.
 *
 * The Python side (banded_ipm.py) scales the problem, checks every array and chooses the
 * starting point; this file only iterates. Per iteration, four passes over the rows: (1) the
 * previous step's update fused with the residuals, the normal matrix P + A'DA formed straight
 * into banded storage and the predictor's right side; then one banded Cholesky factorisation;
 * (2) the predictor's step length and the complementarity it reaches; (3) the corrector's right
 * side; (4) the combined step's length. Row kinds: 0 no finite side, 1 lower only, 2 upper only, 3 both, 4 equality (held by
 * a regularised multiplier, see EQ_DELTA).
 *
 * Only the Python C API's buffer protocol is used (no numpy headers), so `pip install` builds it
 * with nothing but a C compiler. The interpreter lock is released while it iterates.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* Equality rows: a regularised multiplier, y = -(a dx + r) / EQ_DELTA in the Newton step, so
 * the row enters the normal matrix with weight 1 / EQ_DELTA (rows are scaled to unit largest
 * coefficient beforehand). A full step leaves the residual -EQ_DELTA dy, which vanishes as the
 * multipliers settle; the answer is judged on the true residual either way. 1e-10 lost the
 * step to round-off in the factorisation (13 of 40 random test QPs stalled); 1e-8 and 1e-6
 * solved all of 300. */
#define EQ_DELTA 1e-8

enum { ST_SOLVED = 0, ST_MAX_ITER = 1, ST_NUMERICAL = 2, ST_INFEASIBLE = 3 };

static inline double dmax(double a, double b) { return a > b ? a : b; }
static inline double dmin(double a, double b) { return a < b ? a : b; }

/* In-place Cholesky L L' of a symmetric band matrix in lower storage M[d*n + j] = A(j+d, j).
 * A pivot that is not clearly positive is replaced by a tiny one (the direction it carries is
 * then almost dropped); returns how many were replaced. */
static int64_t band_factor(double *M, int64_t n, int64_t kd, double reg)
{
    int64_t nrep = 0;
    for (int64_t j = 0; j < n; j++) {
        double orig = M[j] + reg;
        double d = orig;
        int64_t k0 = j - kd > 0 ? j - kd : 0;
        for (int64_t k = k0; k < j; k++) {
            double l = M[(j - k) * n + k];
            d -= l * l;
        }
        if (!(d > 1e-14 * fabs(orig))) {
            d = 1e-14 * fabs(orig) + 1e-300;
            nrep++;
        }
        double ljj = sqrt(d);
        M[j] = ljj;
        int64_t i1 = j + kd < n - 1 ? j + kd : n - 1;
        for (int64_t i = j + 1; i <= i1; i++) {
            double s = M[(i - j) * n + j];
            int64_t kk0 = i - kd > 0 ? i - kd : 0;
            for (int64_t k = kk0; k < j; k++)
                s -= M[(i - k) * n + k] * M[(j - k) * n + k];
            M[(i - j) * n + j] = s / ljj;
        }
    }
    return nrep;
}

static void band_solve(const double *M, int64_t n, int64_t kd, double *b)
{
    for (int64_t j = 0; j < n; j++) {
        double s = b[j];
        int64_t k0 = j - kd > 0 ? j - kd : 0;
        for (int64_t k = k0; k < j; k++)
            s -= M[(j - k) * n + k] * b[k];
        b[j] = s / M[j];
    }
    for (int64_t j = n - 1; j >= 0; j--) {
        double s = b[j];
        int64_t i1 = j + kd < n - 1 ? j + kd : n - 1;
        for (int64_t i = j + 1; i <= i1; i++)
            s -= M[(i - j) * n + j] * b[i];
        b[j] = s / M[j];
    }
}

/* y = A x for the symmetric band matrix A in lower storage (as band_factor takes it). */
static void band_times(const double *A, int64_t n, int64_t kd, const double *x, double *y)
{
    for (int64_t j = 0; j < n; j++) y[j] = A[j] * x[j];
    for (int64_t d = 1; d <= kd; d++)
        for (int64_t j = 0; j + d < n; j++) {
            double a = A[d * n + j];
            y[j + d] += a * x[j];
            y[j] += a * x[j + d];
        }
}

/* Solve with the factor L of A, then refine: near the optimum the slacks of active rows go to
 * zero and their weights z/s to 1e15 and beyond, so one solve loses digits and the dual residual
 * stalls above the tolerance (seen on a 6,800-station QP with a lateral jerk bound: stuck at 3e-8
 * of its scale, then lost to round-off). Each refinement solves for what the residual of the
 * unfactored matrix A says is still missing (two steps; common practice in interior-point
 * codes). */
static void band_solve_refined(const double *L, const double *A, int64_t n, int64_t kd,
                               const double *rhs, double *x, double *res)
{
    memcpy(x, rhs, sizeof(double) * (size_t)n);
    band_solve(L, n, kd, x);
    for (int pass = 0; pass < 2; pass++) {
        band_times(A, n, kd, x, res);
        for (int64_t j = 0; j < n; j++) res[j] = rhs[j] - res[j];
        band_solve(L, n, kd, res);
        for (int64_t j = 0; j < n; j++) x[j] += res[j];
    }
}

typedef struct {
    int64_t n, m, kd, max_iter;
    const int64_t *indptr, *indices;
    const int8_t *kind;
    const double *data, *lo, *up, *Pb, *q;
    double *x, *sl, *su, *zl, *zu;
    double eps, gap_abs;
    double *info;   /* out: pobj, primal res, dual res, gap, iterations, max step, ... */
} problem_t;

static inline double row_dot(const problem_t *p, int64_t i, const double *v)
{
    double a = 0.0;
    for (int64_t k = p->indptr[i]; k < p->indptr[i + 1]; k++)
        a += p->data[k] * v[p->indices[k]];
    return a;
}

/* Corrector complementarity target of one side: s z + ds_aff dz_aff - sigma mu, with
 * dz_aff = -z - (z/s) ds_aff and Dz = z/s. */
static inline double target(double s, double z, double Dz, double ds_aff, double smu)
{
    return s * z + ds_aff * (-z - Dz * ds_aff) - smu;
}

/* Step of the lower side of row i given a = a_i'dx (combined) and a0 = a_i'dx_aff. */
#define LOWER_STEP(i, a, a0)                                                                  \
    double rpl = r[i] - sl[i] - lo[i];                                                        \
    double Dl = zl[i] * isl[i];                                                               \
    double rcl = target(sl[i], zl[i], Dl, (a0) + rpl, smu);                                   \
    double dsl = (a) + rpl, dzl = -rcl * isl[i] - Dl * dsl;
#define UPPER_STEP(i, a, a0)                                                                  \
    double rpu = r[i] + su[i] - up[i];                                                        \
    double Du = zu[i] * isu[i];                                                               \
    double rcu = target(su[i], zu[i], Du, -(a0) - rpu, smu);                                  \
    double dsu = -(a) - rpu, dzu = -rcu * isu[i] - Du * dsu;

/* How far from 0 any point of the variables' box reaches: each variable's box is the
 * intersection of its rows with one entry; infinite if some variable has no finite box. */
static double box_extent(const problem_t *p)
{
    double *lo = malloc(sizeof(double) * (size_t)p->n), *up = malloc(sizeof(double) * (size_t)p->n);
    if (!lo || !up) { free(lo); free(up); return INFINITY; }
    for (int64_t j = 0; j < p->n; j++) { lo[j] = -INFINITY; up[j] = INFINITY; }
    for (int64_t i = 0; i < p->m; i++) {
        int64_t k = p->indptr[i];
        if (p->indptr[i + 1] - k != 1 || p->data[k] == 0.0) continue;
        int ki = p->kind[i];
        double a = p->data[k], l = -INFINITY, u = INFINITY;
        int has_lo = ki == 1 || ki >= 3, has_up = ki == 2 || ki == 3 || ki == 4;
        double from_lo = p->lo[i] / a, from_up = (ki == 4 ? p->lo[i] : p->up[i]) / a;
        if (a > 0.0) {          /* lo <= a x <= up: x >= lo / a, x <= up / a */
            if (has_lo) l = from_lo;
            if (has_up) u = from_up;
        } else {                /* a < 0: the sides swap */
            if (has_up) l = from_up;
            if (has_lo) u = from_lo;
        }
        int64_t j = p->indices[k];
        lo[j] = dmax(lo[j], l);
        up[j] = dmin(up[j], u);
    }
    double out = 0.0;
    for (int64_t j = 0; j < p->n; j++) out = dmax(out, dmax(fabs(lo[j]), fabs(up[j])));
    free(lo);
    free(up);
    return out;
}

static int ipm(problem_t *p)
{
    const int64_t n = p->n, m = p->m, kd = p->kd;
    const int8_t *kind = p->kind;
    const double *lo = p->lo, *up = p->up, *q = p->q, *Pb = p->Pb;
    double *x = p->x, *sl = p->sl, *su = p->su, *zl = p->zl, *zu = p->zu;
    double *M = malloc(sizeof(double) * (size_t)(2 * (kd + 1) * n));
    double *work = malloc(sizeof(double) * (size_t)(5 * n + 5 * m));
    if (!M || !work) { free(M); free(work); return -1; }
    double *M0 = M + (kd + 1) * n;      /* the normal matrix before factorisation */
    double *Atz = work, *rhs = work + n, *dx = work + 2 * n, *Px = work + 3 * n;
    double *res = work + 4 * n;
    double *r = work + 5 * n, *adx_a = r + m, *adx = adx_a + m, *isl = adx + m, *isu = isl + m;
    double qn = 0.0, bn = 0.0;
    for (int64_t j = 0; j < n; j++) qn = dmax(qn, fabs(q[j]));
    for (int64_t i = 0; i < m; i++) {
        if (kind[i] == 1 || kind[i] >= 3) bn = dmax(bn, fabs(lo[i]));
        if (kind[i] == 2 || kind[i] == 3) bn = dmax(bn, fabs(up[i]));
    }
    double extent = box_extent(p);
    int status = ST_MAX_ITER;
    int64_t it;
    double min_step = 1.0, step = 0.0, smu = 0.0;
    for (it = 0; it <= p->max_iter; it++) {
        /* pass 1: the previous step's update of slacks and multipliers (x is updated already),
         * then residuals, normal matrix, A'z and the predictor's right side */
        memcpy(M, Pb, sizeof(double) * (size_t)((kd + 1) * n));
        memset(Atz, 0, sizeof(double) * (size_t)n);
        memset(rhs, 0, sizeof(double) * (size_t)n);
        double rp = 0.0, xn = 0.0, sn = 0.0, zn = 0.0, comp = 0.0, blin = 0.0;
        int64_t cnt = 0;
        for (int64_t i = 0; i < m; i++) {
            int ki = kind[i];
            if (ki == 0) continue;
            if (it > 0) {
                double a = adx[i], a0 = adx_a[i];
                if (ki == 4) {
                    zl[i] -= step * (a + r[i] - lo[i]) / EQ_DELTA;
                } else {
                    if (ki & 1) {
                        LOWER_STEP(i, a, a0)
                        sl[i] += step * dsl;
                        zl[i] += step * dzl;
                    }
                    if (ki & 2) {
                        UPPER_STEP(i, a, a0)
                        su[i] += step * dsu;
                        zu[i] += step * dzu;
                    }
                }
            }
            double ri = row_dot(p, i, x);
            r[i] = ri;
            double D = 0.0, w = 0.0, y = 0.0;
            if (ki == 4) {
                double re = ri - lo[i];
                rp = dmax(rp, fabs(re));
                D = 1.0 / EQ_DELTA;
                w = re / EQ_DELTA;
                y = zl[i];
                zn = dmax(zn, fabs(y));
                blin += lo[i] * y;
            } else {
                if (ki & 1) {
                    double is = 1.0 / sl[i];
                    isl[i] = is;
                    double rpl = ri - sl[i] - lo[i], Dl = zl[i] * is;
                    rp = dmax(rp, fabs(rpl));
                    D += Dl; w += zl[i] + Dl * rpl; y += zl[i];
                    comp += sl[i] * zl[i]; cnt++;
                    sn = dmax(sn, sl[i]); zn = dmax(zn, zl[i]);
                    blin += lo[i] * zl[i];
                }
                if (ki & 2) {
                    double is = 1.0 / su[i];
                    isu[i] = is;
                    double rpu = ri + su[i] - up[i], Du = zu[i] * is;
                    rp = dmax(rp, fabs(rpu));
                    D += Du; w += -zu[i] + Du * rpu; y -= zu[i];
                    comp += su[i] * zu[i]; cnt++;
                    sn = dmax(sn, su[i]); zn = dmax(zn, zu[i]);
                    blin -= up[i] * zu[i];
                }
            }
            int64_t k0 = p->indptr[i], k1 = p->indptr[i + 1];
            for (int64_t a = k0; a < k1; a++) {
                int64_t ja = p->indices[a];
                double va = p->data[a];
                Atz[ja] += va * y;
                rhs[ja] -= va * w;
                double Dva = D * va;
                for (int64_t b = k0; b <= a; b++)
                    M[(ja - p->indices[b]) * n + p->indices[b]] += Dva * p->data[b];
            }
        }
        double xPx = 0.0, qx = 0.0, rdn = 0.0, rd1 = 0.0, Atzn = 0.0, Pxn = 0.0;
        for (int64_t j = 0; j < n; j++) {
            double acc = Pb[j] * x[j];
            for (int64_t d = 1; d <= kd; d++) {
                if (j + d < n) acc += Pb[d * n + j] * x[j + d];
                if (j - d >= 0) acc += Pb[d * n + j - d] * x[j - d];
            }
            Px[j] = acc;
            xn = dmax(xn, fabs(x[j]));
            xPx += x[j] * acc;
            qx += q[j] * x[j];
            double rdj = acc + q[j] - Atz[j];
            rdn = dmax(rdn, fabs(rdj));
            rd1 += fabs(rdj);
            Atzn = dmax(Atzn, fabs(Atz[j]));
            Pxn = dmax(Pxn, fabs(acc));
            rhs[j] -= rdj;
        }
        double pobj = 0.5 * xPx + qx, dobj = -0.5 * xPx + blin;
        double gap = fabs(pobj - dobj);
        p->info[0] = pobj; p->info[1] = rp; p->info[2] = rdn; p->info[3] = gap;
        p->info[6] = dmax(1.0, bn + xn + sn); p->info[7] = dmax(1.0, qn + Pxn + Atzn);
        int feasible = rp <= p->eps * p->info[6] && rdn <= p->eps * p->info[7];
        if (!isfinite(pobj) || !isfinite(rp) || !isfinite(rdn)) { status = ST_NUMERICAL; break; }
        if (feasible && (gap <= p->gap_abs
                         || gap <= p->eps * dmax(1.0, dmin(fabs(pobj), fabs(dobj))))) {
            status = ST_SOLVED;
            break;
        }
        /* On a degenerate optimum the dual residual can stall above its tolerance while the
         * answer is as good as asked. With the primal feasible and every variable inside a box
         * reaching at most `extent` from 0: f(x) - f(x*) <= gap + |Px + q - A'z|_1 extent
         * (the Lagrangian's convexity; banded_ipm.py, _judge, derives and checks the same). */
        if (rp <= p->eps * p->info[6] && gap + rd1 * extent <= p->gap_abs) {
            status = ST_SOLVED;
            break;
        }
        /* primal infeasibility: y = zl - zu with A'y ~ 0 and lo'zl - up'zu > 0, duals diverging */
        if (blin > 0.0 && Atzn <= 1e-8 * blin && zn > 1e6 * dmax(1.0, qn)) {
            status = ST_INFEASIBLE;
            break;
        }
        if (it == p->max_iter) break;
        double mu = comp / (double)(cnt > 0 ? cnt : 1);

        memcpy(M0, M, sizeof(double) * (size_t)((kd + 1) * n));
        band_factor(M, n, kd, 1e-13);
        band_solve_refined(M, M0, n, kd, rhs, dx, res);

        /* pass 2: predictor's step length, and the sums that give the complementarity it
         * reaches: sum (s + t ds)(z + t dz) = comp + t sum(s dz + z ds) + t^2 sum(ds dz) */
        double alpha = 1.0, c1 = 0.0, c2 = 0.0;
        for (int64_t i = 0; i < m; i++) {
            int ki = kind[i];
            if (ki == 0 || ki == 4) continue;
            double a = row_dot(p, i, dx);
            adx_a[i] = a;
            if (ki & 1) {
                double ds = a + (r[i] - sl[i] - lo[i]), dz = -zl[i] - zl[i] * isl[i] * ds;
                if (ds < 0.0) alpha = dmin(alpha, -sl[i] / ds);
                if (dz < 0.0) alpha = dmin(alpha, -zl[i] / dz);
                c1 += sl[i] * dz + zl[i] * ds;
                c2 += ds * dz;
            }
            if (ki & 2) {
                double ds = -a - (r[i] + su[i] - up[i]), dz = -zu[i] - zu[i] * isu[i] * ds;
                if (ds < 0.0) alpha = dmin(alpha, -su[i] / ds);
                if (dz < 0.0) alpha = dmin(alpha, -zu[i] / dz);
                c1 += su[i] * dz + zu[i] * ds;
                c2 += ds * dz;
            }
        }
        double mu_a = (comp + alpha * c1 + alpha * alpha * c2) / (double)(cnt > 0 ? cnt : 1);
        double sigma = mu > 0.0 ? dmin(1.0, pow(dmax(mu_a, 0.0) / mu, 3.0)) : 0.0;
        smu = sigma * mu;

        /* pass 3: corrector's right side */
        for (int64_t j = 0; j < n; j++) rhs[j] = -(Px[j] + q[j] - Atz[j]);
        for (int64_t i = 0; i < m; i++) {
            int ki = kind[i];
            if (ki == 0) continue;
            double w = 0.0;
            if (ki == 4) {
                w = (r[i] - lo[i]) / EQ_DELTA;
            } else {
                double a = adx_a[i];
                if (ki & 1) {
                    double rpl = r[i] - sl[i] - lo[i], Dl = zl[i] * isl[i];
                    w += target(sl[i], zl[i], Dl, a + rpl, smu) * isl[i] + Dl * rpl;
                }
                if (ki & 2) {
                    double rpu = r[i] + su[i] - up[i], Du = zu[i] * isu[i];
                    w += -target(su[i], zu[i], Du, -a - rpu, smu) * isu[i] + Du * rpu;
                }
            }
            for (int64_t k = p->indptr[i]; k < p->indptr[i + 1]; k++)
                rhs[p->indices[k]] -= p->data[k] * w;
        }
        band_solve_refined(M, M0, n, kd, rhs, dx, res);

        /* pass 4: the combined step's length (one length for primal and dual: the dual
         * residual P x + q - A'z involves both); the update itself is the start of pass 1 */
        alpha = 1.0;
        for (int64_t i = 0; i < m; i++) {
            int ki = kind[i];
            if (ki == 0) continue;
            double a = row_dot(p, i, dx);
            adx[i] = a;
            if (ki == 4) continue;
            if (ki & 1) {
                LOWER_STEP(i, a, adx_a[i])
                if (dsl < 0.0) alpha = dmin(alpha, -sl[i] / dsl);
                if (dzl < 0.0) alpha = dmin(alpha, -zl[i] / dzl);
            }
            if (ki & 2) {
                UPPER_STEP(i, a, adx_a[i])
                if (dsu < 0.0) alpha = dmin(alpha, -su[i] / dsu);
                if (dzu < 0.0) alpha = dmin(alpha, -zu[i] / dzu);
            }
        }
        step = 0.99 * alpha;
        min_step = dmin(min_step, step);
        if (!(step >= 1e-10)) { status = ST_NUMERICAL; break; }
        for (int64_t j = 0; j < n; j++) x[j] += step * dx[j];
    }
    p->info[4] = (double)it;
    p->info[5] = min_step;
    free(M);
    free(work);
    return status;
}

/* ---- Python binding: every array through the buffer protocol ---- */

static int get_buf(PyObject *obj, Py_buffer *view, int writable, const char *fmt, Py_ssize_t n,
                   const char *name)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(obj, view, flags) != 0) return -1;
    Py_ssize_t item = fmt[0] == 'b' ? 1 : 8;
    int ok = view->itemsize == item && view->len == n * item
             && (strcmp(view->format, fmt) == 0
                 || (fmt[0] == 'q' && strcmp(view->format, "l") == 0 && sizeof(long) == 8));
    if (!ok) {
        PyErr_Format(PyExc_ValueError, "banded IPM kernel: array '%s' has the wrong type or "
                     "length (want %zd items of format '%s')", name, n, fmt);
        PyBuffer_Release(view);
        return -1;
    }
    return 0;
}

static PyObject *py_solve(PyObject *self, PyObject *args)
{
    (void)self;
    long long n, kd, max_iter;
    double eps, gap_abs;
    PyObject *o[15];
    if (!PyArg_ParseTuple(args, "LLOOOOOOOOOOOOOddLO", &n, &kd, &o[0], &o[1], &o[2], &o[3],
                          &o[4], &o[5], &o[6], &o[7], &o[8], &o[9], &o[10], &o[11], &o[12],
                          &eps, &gap_abs, &max_iter, &o[13]))
        return NULL;
    if (n < 1 || kd < 0 || kd >= n + 1 || max_iter < 0) {
        PyErr_SetString(PyExc_ValueError, "banded IPM kernel: bad sizes");
        return NULL;
    }
    Py_buffer v[14];
    int got = 0;
    Py_buffer ip;
    if (PyObject_GetBuffer(o[0], &ip, PyBUF_C_CONTIGUOUS | PyBUF_FORMAT) != 0) return NULL;
    Py_ssize_t m = ip.len / 8 - 1;
    PyBuffer_Release(&ip);
    if (m < 0) { PyErr_SetString(PyExc_ValueError, "banded IPM kernel: empty indptr"); return NULL; }
    /* indptr, indices, data, lo, up, kind, Pb, q, x, sl, su, zl, zu, info */
    const char *names[14] = {"indptr", "indices", "data", "lo", "up", "kind", "Pb", "q", "x",
                             "sl", "su", "zl", "zu", "info"};
    const char *fmts[14] = {"q", "q", "d", "d", "d", "b", "d", "d", "d", "d", "d", "d", "d", "d"};
    int wr[14] = {0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 1};
    Py_ssize_t len[14] = {m + 1, 0, 0, m, m, m, (kd + 1) * n, n, n, m, m, m, m, 8};
    PyObject *objs[14] = {o[0], o[1], o[2], o[3], o[4], o[5], o[6], o[7], o[8], o[9], o[10],
                          o[11], o[12], o[13]};
    PyObject *result = NULL;
    for (got = 0; got < 14; got++) {
        if (got == 1 || got == 2) {
            const int64_t *indptr = (const int64_t *)v[0].buf;
            len[got] = (Py_ssize_t)indptr[m];
        }
        if (get_buf(objs[got], &v[got], wr[got], fmts[got], len[got], names[got]) != 0)
            goto done;
    }
    {
        const int64_t *indptr = (const int64_t *)v[0].buf, *indices = (const int64_t *)v[1].buf;
        for (Py_ssize_t i = 0; i < m; i++) {
            if (indptr[i] > indptr[i + 1] || indptr[i] < 0) {
                PyErr_SetString(PyExc_ValueError, "banded IPM kernel: indptr not ascending");
                goto done;
            }
            for (int64_t k = indptr[i]; k < indptr[i + 1]; k++) {
                if (indices[k] < 0 || indices[k] >= n
                    || indices[k] - indices[indptr[i]] > kd
                    || (k > indptr[i] && indices[k] <= indices[k - 1])) {
                    PyErr_SetString(PyExc_ValueError, "banded IPM kernel: row indices unsorted, "
                                    "out of range or wider than the band");
                    goto done;
                }
            }
        }
    }
    {
        problem_t p = {(int64_t)n, (int64_t)m, (int64_t)kd, (int64_t)max_iter,
                       v[0].buf, v[1].buf, v[5].buf, v[2].buf, v[3].buf, v[4].buf, v[6].buf,
                       v[7].buf, v[8].buf, v[9].buf, v[10].buf, v[11].buf, v[12].buf,
                       eps, gap_abs, v[13].buf};
        int status;
        Py_BEGIN_ALLOW_THREADS
        status = ipm(&p);
        Py_END_ALLOW_THREADS
        if (status < 0) { PyErr_NoMemory(); goto done; }
        result = PyLong_FromLong(status);
    }
done:
    for (int k = 0; k < got; k++) PyBuffer_Release(&v[k]);
    return result;
}

static PyMethodDef methods[] = {
    {"solve", py_solve, METH_VARARGS,
     "solve(n, kd, indptr, indices, data, lo, up, kind, Pb, q, x, sl, su, zl, zu, eps, gap_abs,"
     " max_iter, info) -> status (0 solved, 1 iteration limit, 2 numerical trouble, 3 primal "
     "infeasible); x, sl, su, zl, zu, info updated in place."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_banded_ipm", NULL, -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__banded_ipm(void) { return PyModule_Create(&module); }

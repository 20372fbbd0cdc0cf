/* Compiled kernel of curvespeed.solvers.banded_ipm: Mehrotra predictor-corrector iterations
 * for  min x'Px/2 + q'x  s.t.  lo <= Ax <= up  when P + A'DA is banded.
 *
 * The Python side (banded_ipm.py) scales the problem, checks every array and chooses the
 * starting point; this file only iterates. Per iteration, three passes over the rows: (1) the
 * previous step's update fused with the residuals, the normal matrix P + A'DA formed straight
 * into banded storage and the predictor's right side; then one banded Cholesky factorisation;
 * (2) the predictor's step length, the complementarity it reaches and the corrector's right
 * side (in two parts, as it is linear in sigma mu, which this pass decides); (3) the combined
 * step's length. Row kinds: 0 no finite side, 1 lower only, 2 upper only, 3 both, 4 equality
 * (held by a regularised multiplier, see EQ_DELTA).
 *
 * Speed (the rows are most of the work: a QP has about eight rows per variable): rows of one,
 * two and three entries (every row of the convex solver's QPs) take unrolled paths, the band is
 * stored column by column (a column's entries side by side) with the common bandwidth 2 solved
 * by its own unrolled loops and the factor's diagonal kept as its reciprocal, and a step-length
 * ratio is divided out only where it can shorten the step.
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

/* ---- symmetric band matrices: lower band by column, L[j * (kd + 1) + d] = A(j + d, j) ---- */

/* In-place Cholesky L L', the diagonal of L stored as its reciprocal (the solves multiply by it:
 * a division's latency was most of their time, each unknown waiting for the one before). A pivot
 * that is not clearly positive is replaced by a tiny one (the direction it carries is then almost
 * dropped); returns how many were replaced. */
static int64_t band_factor(double *L, int64_t n, int64_t kd, double reg)
{
    const int64_t w = kd + 1;
    int64_t nrep = 0;
    for (int64_t j = 0; j < n; j++) {
        double *cj = L + j * w;
        double orig = cj[0] + reg;
        double d = orig;
        for (int64_t k = j - kd > 0 ? j - kd : 0; k < j; k++) {
            double l = L[k * w + (j - k)];
            d -= l * l;
        }
        if (!(d > 1e-14 * fabs(orig))) {
            d = 1e-14 * fabs(orig) + 1e-300;
            nrep++;
        }
        double ljj = sqrt(d);
        cj[0] = ljj;
        int64_t i1 = j + kd < n - 1 ? j + kd : n - 1;
        for (int64_t i = j + 1; i <= i1; i++) {
            double s = cj[i - j];
            for (int64_t k = i - kd > 0 ? i - kd : 0; k < j; k++)
                s -= L[k * w + (i - k)] * L[k * w + (j - k)];
            cj[i - j] = s / ljj;
        }
        cj[0] = 1.0 / ljj;
    }
    return nrep;
}

/* band_solve for bandwidth 2: the same operations in the same order, the last two unknowns
 * kept in registers (each one waits for the one before: this loop is bound by that chain). */
static void band_solve2(const double *L, int64_t n, double *b)
{
    double b2 = b[0] * L[0];
    b[0] = b2;
    double b1 = (b[1] - L[1] * b2) * L[3];
    b[1] = b1;
    for (int64_t j = 2; j < n; j++) {
        double s = b[j];
        s -= L[(j - 2) * 3 + 2] * b2;
        s -= L[(j - 1) * 3 + 1] * b1;
        s = s * L[j * 3];
        b[j] = s;
        b2 = b1;
        b1 = s;
    }
    b2 = b[n - 1] * L[(n - 1) * 3];             /* now b2 = b[j + 2], b1 = b[j + 1] */
    b[n - 1] = b2;
    b1 = (b[n - 2] - L[(n - 2) * 3 + 1] * b2) * L[(n - 2) * 3];
    b[n - 2] = b1;
    for (int64_t j = n - 3; j >= 0; j--) {
        double s = b[j];
        s -= L[j * 3 + 1] * b1;
        s -= L[j * 3 + 2] * b2;
        s = s * L[j * 3];
        b[j] = s;
        b2 = b1;
        b1 = s;
    }
}

/* b := (L L')^-1 b, L from band_factor */
static void band_solve(const double *L, int64_t n, int64_t kd, double *b)
{
    if (kd == 2 && n >= 2) {
        band_solve2(L, n, b);
        return;
    }
    const int64_t w = kd + 1;
    for (int64_t j = 0; j < n; j++) {
        double s = b[j];
        for (int64_t k = j - kd > 0 ? j - kd : 0; k < j; k++)
            s -= L[k * w + (j - k)] * b[k];
        b[j] = s * L[j * w];
    }
    for (int64_t j = n - 1; j >= 0; j--) {
        double s = b[j];
        int64_t i1 = j + kd < n - 1 ? j + kd : n - 1;
        for (int64_t i = j + 1; i <= i1; i++)
            s -= L[j * w + (i - j)] * b[i];
        b[j] = s * L[j * w];
    }
}

/* y = A x; each y[j] sums the diagonal's term, then for d = 1, 2, ... the term from below and
 * the term from above. */
static void band_times(const double *A, int64_t n, int64_t kd, const double *x, double *y)
{
    const int64_t w = kd + 1;
    for (int64_t j = 0; j < n; j++) {
        double acc = A[j * w] * x[j];
        for (int64_t d = 1; d <= kd; d++) {
            if (j - d >= 0) acc += A[(j - d) * w + d] * x[j - d];
            if (j + d < n) acc += A[j * w + d] * x[j + d];
        }
        y[j] = acc;
    }
}

/* Solve with the factor L of A, then refine: near the optimum the slacks of active rows go to
 * zero and their weights z/s to 1e15 and beyond, so one solve loses digits and the dual residual
 * stalls above the tolerance (seen on a 6,800-station QP with a lateral jerk bound: stuck at 3e-8
 * of its scale, then lost to round-off). Each refinement solves for what the residual of the
 * unfactored matrix A says is still missing (up to two steps; common practice in interior-point
 * codes). Refinement shrinks the error by about the same factor each step, the size of the
 * first correction relative to x, so after a first correction below 1e-8 of x a second would
 * change x by about 1e-16 of it, below its round-off, and is skipped (most iterations before
 * the last few). */
static void band_solve_refined(const double *L, const double *A, int64_t n, int64_t kd,
                               const double *rhs, double *x, double *res)
{
    memcpy(x, rhs, sizeof(double) * (size_t)n);
    band_solve(L, n, kd, x);
    for (int pass = 0; pass < 2; pass++) {
        band_times(A, n, kd, x, res);
        for (int64_t j = 0; j < n; j++) res[j] = rhs[j] - res[j];
        band_solve(L, n, kd, res);
        double cn = 0.0, xn = 0.0;
        for (int64_t j = 0; j < n; j++) {
            x[j] += res[j];
            cn = dmax(cn, fabs(res[j]));
            xn = dmax(xn, fabs(x[j]));
        }
        if (!(cn > 1e-8 * xn)) break;
    }
}

/* ---- the problem and the iteration's work arrays ---- */

typedef struct {
    int64_t n, m, kd, max_iter;
    const int64_t *indptr, *indices;
    const int8_t *kind;
    const double *data, *lo, *up, *Pb, *q;
    double *x, *sl, *su, *zl, *zu;
    double eps, gap_abs;
    double *info;   /* out: pobj, primal res, dual res, gap, iterations, max step, ... */
} problem_t;

typedef struct {
    double *L, *L0, *PbT;           /* normal matrix (factored), unfactored, P: by column */
    double *Atz, *rhs, *dx, *Px, *res, *Ais;
    double *r, *adx_a, *adx, *isl, *isu;
    double *dsl, *dzl, *dsu, *dzu;   /* the combined step of each side (pass 3 for pass 1) */
} work_t;

/* a_i' v: terms summed in column order from zero (rows of 1-3 entries unrolled) */
static inline double row_dot(const problem_t *p, int64_t i, const double *v)
{
    const int64_t k0 = p->indptr[i], nz = p->indptr[i + 1] - k0;
    const int64_t *ix = p->indices + k0;
    const double *av = p->data + k0;
    switch (nz) {
    case 1: return 0.0 + av[0] * v[ix[0]];
    case 2: return (0.0 + av[0] * v[ix[0]]) + av[1] * v[ix[1]];
    case 3: return ((0.0 + av[0] * v[ix[0]]) + av[1] * v[ix[1]]) + av[2] * v[ix[2]];
    default: {
        double a = 0.0;
        for (int64_t k = 0; k < nz; k++) a += av[k] * v[ix[k]];
        return a;
    }
    }
}

/* out -= w a_i, out2 += w2 a_i */
static inline void row_scatter(const problem_t *p, int64_t i, double w, double w2, double *out,
                               double *out2)
{
    const int64_t k0 = p->indptr[i], nz = p->indptr[i + 1] - k0;
    const int64_t *ix = p->indices + k0;
    const double *av = p->data + k0;
    for (int64_t k = 0; k < nz; k++) {
        out[ix[k]] -= av[k] * w;
        out2[ix[k]] += av[k] * w2;
    }
}

/* Row i's share of pass 1: A'z += a y, rhs -= a w, L += D a a' (lower band). */
static inline void row_normal(const problem_t *p, int64_t i, double D, double w, double y,
                              double *Atz, double *rhs, double *L)
{
    const int64_t k0 = p->indptr[i], nz = p->indptr[i + 1] - k0, cw = p->kd + 1;
    const int64_t *ix = p->indices + k0;
    const double *av = p->data + k0;
    if (nz >= 1 && nz <= 3) {
        int64_t j0 = ix[0];
        double v0 = av[0], D0 = D * v0;
        Atz[j0] += v0 * y;
        rhs[j0] -= v0 * w;
        L[j0 * cw] += D0 * v0;
        if (nz == 1) return;
        int64_t j1 = ix[1];
        double v1 = av[1], D1 = D * v1;
        Atz[j1] += v1 * y;
        rhs[j1] -= v1 * w;
        L[j0 * cw + (j1 - j0)] += D1 * v0;
        L[j1 * cw] += D1 * v1;
        if (nz == 2) return;
        int64_t j2 = ix[2];
        double v2 = av[2], D2 = D * v2;
        Atz[j2] += v2 * y;
        rhs[j2] -= v2 * w;
        L[j0 * cw + (j2 - j0)] += D2 * v0;
        L[j1 * cw + (j2 - j1)] += D2 * v1;
        L[j2 * cw] += D2 * v2;
        return;
    }
    for (int64_t a = 0; a < nz; a++) {
        int64_t ja = ix[a];
        double va = av[a], Dva = D * va;
        Atz[ja] += va * y;
        rhs[ja] -= va * w;
        for (int64_t b = 0; b <= a; b++)
            L[ix[b] * cw + (ja - ix[b])] += Dva * av[b];
    }
}

/* min(alpha, -s / d) where d < 0; the division only where it may come out below alpha (when
 * s >= alpha |d| (1 + 1e-14) the quotient rounds to alpha or above, so the minimum is alpha as
 * it would be with the division; NaNs take the division, as they did). */
static inline double ratio(double alpha, double s, double d)
{
    if (d < 0.0 && !(s >= alpha * -d * (1.0 + 1e-14)))
        alpha = dmin(alpha, -s / d);
    return alpha;
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

/* what pass 1 sums over the rows */
typedef struct {
    double rp, sn, zn, comp, blin;
    int64_t cnt;
} row_sums_t;

/* Pass 1: the previous step's update of slacks and multipliers (x is updated already, `first`
 * on the first iteration: nothing to update), then residuals, normal matrix, A'z and the
 * predictor's right side. */
static void pass_normal(const problem_t *p, work_t *wk, int first, double step,
                        row_sums_t *out)
{
    const int64_t n = p->n, m = p->m;
    const int8_t *kind = p->kind;
    const double *lo = p->lo, *up = p->up;
    double *sl = p->sl, *su = p->su, *zl = p->zl, *zu = p->zu;
    double *r = wk->r, *isl = wk->isl, *isu = wk->isu;
    const double *adx = wk->adx;
    memcpy(wk->L, wk->PbT, sizeof(double) * (size_t)((p->kd + 1) * n));
    memset(wk->Atz, 0, sizeof(double) * (size_t)n);
    memset(wk->rhs, 0, sizeof(double) * (size_t)n);
    double rp = 0.0, sn = 0.0, zn = 0.0, comp = 0.0, blin = 0.0;
    int64_t cnt = 0;
    for (int64_t i = 0; i < m; i++) {
        int ki = kind[i];
        if (ki == 0) continue;
        if (!first) {
            if (ki == 4) {
                zl[i] -= step * (adx[i] + r[i] - lo[i]) / EQ_DELTA;
            } else {
                if (ki & 1) {
                    sl[i] += step * wk->dsl[i];
                    zl[i] += step * wk->dzl[i];
                }
                if (ki & 2) {
                    su[i] += step * wk->dsu[i];
                    zu[i] += step * wk->dzu[i];
                }
            }
        }
        double ri = row_dot(p, i, p->x);
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
        row_normal(p, i, D, w, y, wk->Atz, wk->rhs, wk->L);
    }
    out->rp = rp; out->sn = sn; out->zn = zn; out->comp = comp; out->blin = blin;
    out->cnt = cnt;
}

/* what the pass over the variables sums */
typedef struct {
    double xn, xPx, qx, rdn, rd1, Atzn, Pxn;
} var_sums_t;

/* P x, the dual residual P x + q - A'z (taken off the predictor's right side) and norms. */
static void pass_dual(const problem_t *p, work_t *wk, var_sums_t *o)
{
    const int64_t n = p->n, kd = p->kd;
    const double *Pb = p->Pb, *x = p->x, *q = p->q, *Atz = wk->Atz;
    double *Px = wk->Px, *rhs = wk->rhs;
    double xn = 0.0, xPx = 0.0, qx = 0.0, rdn = 0.0, rd1 = 0.0, Atzn = 0.0, Pxn = 0.0;
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
    o->xn = xn; o->xPx = xPx; o->qx = qx; o->rdn = rdn; o->rd1 = rd1; o->Atzn = Atzn;
    o->Pxn = Pxn;
}

/* Pass 2: the predictor's step length; the sums that give the complementarity it reaches,
 * sum (s + t ds)(z + t dz) = comp + t sum(s dz + z ds) + t^2 sum(ds dz); and the corrector's
 * right side, which is linear in sigma mu, the one number this pass decides: rhs gets the part
 * without it and Ais = A'(1/s_lo - 1/s_up) the factor of sigma mu (corrector_rhs adds the two),
 * so no pass over the rows waits for sigma mu. Returns the step length. */
static double pass_predictor(const problem_t *p, work_t *wk, double *c1_out, double *c2_out)
{
    const int8_t *kind = p->kind;
    const double *lo = p->lo, *up = p->up, *sl = p->sl, *su = p->su, *zl = p->zl, *zu = p->zu;
    const double *r = wk->r, *isl = wk->isl, *isu = wk->isu;
    double *adx_a = wk->adx_a, *rhs = wk->rhs, *Ais = wk->Ais;
    double alpha = 1.0, c1 = 0.0, c2 = 0.0;
    for (int64_t j = 0; j < p->n; j++) {
        rhs[j] = -(wk->Px[j] + p->q[j] - wk->Atz[j]);
        Ais[j] = 0.0;
    }
    for (int64_t i = 0; i < p->m; i++) {
        int ki = kind[i];
        if (ki == 0) continue;
        if (ki == 4) {
            row_scatter(p, i, (r[i] - lo[i]) / EQ_DELTA, 0.0, rhs, Ais);
            continue;
        }
        double a = row_dot(p, i, wk->dx);
        adx_a[i] = a;
        double w = 0.0, g = 0.0;
        if (ki & 1) {
            double rpl = r[i] - sl[i] - lo[i], Dl = zl[i] * isl[i];
            double ds = a + rpl, dz = -zl[i] - Dl * ds;
            alpha = ratio(alpha, sl[i], ds);
            alpha = ratio(alpha, zl[i], dz);
            c1 += sl[i] * dz + zl[i] * ds;
            c2 += ds * dz;
            w += target(sl[i], zl[i], Dl, ds, 0.0) * isl[i] + Dl * rpl;
            g += isl[i];
        }
        if (ki & 2) {
            double rpu = r[i] + su[i] - up[i], Du = zu[i] * isu[i];
            double ds = -a - rpu, dz = -zu[i] - Du * ds;
            alpha = ratio(alpha, su[i], ds);
            alpha = ratio(alpha, zu[i], dz);
            c1 += su[i] * dz + zu[i] * ds;
            c2 += ds * dz;
            w += -target(su[i], zu[i], Du, ds, 0.0) * isu[i] + Du * rpu;
            g -= isu[i];
        }
        row_scatter(p, i, w, g, rhs, Ais);
    }
    *c1_out = c1;
    *c2_out = c2;
    return alpha;
}

/* The corrector's right side, sigma mu known (pass_predictor). */
static void corrector_rhs(const problem_t *p, work_t *wk, double smu)
{
    for (int64_t j = 0; j < p->n; j++) wk->rhs[j] += smu * wk->Ais[j];
}

/* Pass 3: the combined step's length (one length for primal and dual: the dual residual
 * P x + q - A'z involves both); the step of each side is kept for the update, which is the
 * start of pass 1. */
static double pass_step(const problem_t *p, work_t *wk, double smu)
{
    const int8_t *kind = p->kind;
    const double *lo = p->lo, *up = p->up, *sl = p->sl, *su = p->su, *zl = p->zl, *zu = p->zu;
    const double *r = wk->r, *isl = wk->isl, *isu = wk->isu, *adx_a = wk->adx_a;
    double *adx = wk->adx;
    double alpha = 1.0;
    for (int64_t i = 0; i < p->m; i++) {
        int ki = kind[i];
        if (ki == 0) continue;
        double a = row_dot(p, i, wk->dx);
        adx[i] = a;
        if (ki == 4) continue;
        if (ki & 1) {
            LOWER_STEP(i, a, adx_a[i])
            alpha = ratio(alpha, sl[i], dsl);
            alpha = ratio(alpha, zl[i], dzl);
            wk->dsl[i] = dsl;
            wk->dzl[i] = dzl;
        }
        if (ki & 2) {
            UPPER_STEP(i, a, adx_a[i])
            alpha = ratio(alpha, su[i], dsu);
            alpha = ratio(alpha, zu[i], dzu);
            wk->dsu[i] = dsu;
            wk->dzu[i] = dzu;
        }
    }
    return alpha;
}

/* Is the iterate the answer? Sets p->info and returns a status, or -1 to go on. */
static int judge(problem_t *p, const row_sums_t *rs, const var_sums_t *vs, double qn, double bn,
                 double extent)
{
    double pobj = 0.5 * vs->xPx + vs->qx, dobj = -0.5 * vs->xPx + rs->blin;
    double gap = fabs(pobj - dobj), rp = rs->rp, rdn = vs->rdn;
    p->info[0] = pobj; p->info[1] = rp; p->info[2] = rdn; p->info[3] = gap;
    p->info[6] = dmax(1.0, bn + vs->xn + rs->sn);
    p->info[7] = dmax(1.0, qn + vs->Pxn + vs->Atzn);
    int feasible = rp <= p->eps * p->info[6] && rdn <= p->eps * p->info[7];
    if (!isfinite(pobj) || !isfinite(rp) || !isfinite(rdn)) return ST_NUMERICAL;
    if (feasible && (gap <= p->gap_abs
                     || gap <= p->eps * dmax(1.0, dmin(fabs(pobj), fabs(dobj)))))
        return ST_SOLVED;
    /* On a degenerate optimum the dual residual can stall above its tolerance while the
     * answer is as good as asked. With the primal feasible and every variable inside a box
     * reaching at most `extent` from 0: f(x) - f(x*) <= gap + |Px + q - A'z|_1 extent
     * (the Lagrangian's convexity; banded_ipm.py, _judge, derives and checks the same). */
    if (rp <= p->eps * p->info[6] && gap + vs->rd1 * extent <= p->gap_abs) return ST_SOLVED;
    /* primal infeasibility: y = zl - zu with A'y ~ 0 and lo'zl - up'zu > 0, duals diverging */
    if (rs->blin > 0.0 && vs->Atzn <= 1e-8 * rs->blin && rs->zn > 1e6 * dmax(1.0, qn))
        return ST_INFEASIBLE;
    return -1;
}

static int ipm(problem_t *p)
{
    const int64_t n = p->n, m = p->m, kd = p->kd, cw = kd + 1;
    const int8_t *kind = p->kind;
    double *band = malloc(sizeof(double) * (size_t)(3 * cw * n));
    double *work = malloc(sizeof(double) * (size_t)(6 * n + 9 * m));
    if (!band || !work) { free(band); free(work); return -1; }
    double *rw = work + 6 * n;          /* the rows' arrays */
    work_t wk = {band, band + cw * n, band + 2 * cw * n, work, work + n, work + 2 * n,
                 work + 3 * n, work + 4 * n, work + 5 * n, rw, rw + m, rw + 2 * m, rw + 3 * m,
                 rw + 4 * m, rw + 5 * m, rw + 6 * m, rw + 7 * m, rw + 8 * m};
    for (int64_t d = 0; d <= kd; d++)
        for (int64_t j = 0; j < n; j++) wk.PbT[j * cw + d] = p->Pb[d * n + j];
    double qn = 0.0, bn = 0.0;
    for (int64_t j = 0; j < n; j++) qn = dmax(qn, fabs(p->q[j]));
    for (int64_t i = 0; i < m; i++) {
        if (kind[i] == 1 || kind[i] >= 3) bn = dmax(bn, fabs(p->lo[i]));
        if (kind[i] == 2 || kind[i] == 3) bn = dmax(bn, fabs(p->up[i]));
    }
    double extent = box_extent(p);
    int status = ST_MAX_ITER;
    int64_t it;
    double min_step = 1.0, step = 0.0, smu = 0.0;
    for (it = 0; it <= p->max_iter; it++) {
        row_sums_t rs;
        var_sums_t vs;
        pass_normal(p, &wk, it == 0, step, &rs);
        pass_dual(p, &wk, &vs);
        int verdict = judge(p, &rs, &vs, qn, bn, extent);
        if (verdict >= 0) { status = verdict; break; }
        if (it == p->max_iter) break;
        double mu = rs.comp / (double)(rs.cnt > 0 ? rs.cnt : 1);

        memcpy(wk.L0, wk.L, sizeof(double) * (size_t)(cw * n));
        band_factor(wk.L, n, kd, 1e-13);
        band_solve_refined(wk.L, wk.L0, n, kd, wk.rhs, wk.dx, wk.res);

        double c1, c2;
        double alpha = pass_predictor(p, &wk, &c1, &c2);
        double mu_a = (rs.comp + alpha * c1 + alpha * alpha * c2)
                      / (double)(rs.cnt > 0 ? rs.cnt : 1);
        double sigma = mu > 0.0 ? dmin(1.0, pow(dmax(mu_a, 0.0) / mu, 3.0)) : 0.0;
        smu = sigma * mu;

        corrector_rhs(p, &wk, smu);
        band_solve_refined(wk.L, wk.L0, n, kd, wk.rhs, wk.dx, wk.res);

        step = 0.99 * pass_step(p, &wk, smu);
        min_step = dmin(min_step, step);
        if (!(step >= 1e-10)) { status = ST_NUMERICAL; break; }
        for (int64_t j = 0; j < n; j++) p->x[j] += step * wk.dx[j];
    }
    p->info[4] = (double)it;
    p->info[5] = min_step;
    free(band);
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

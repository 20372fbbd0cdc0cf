/* SpeedProblem.accel_bounds at one node, without the power limit, in numpy's operations (its
 * maximum and minimum propagate NaN, its ** 2 is a product), for the compiled twins of the
 * Python code: _window_qp.c (a window's acceleration chords) and _envelope_passes.c (the lateral
 * ceiling's bisection). One copy, so the friction ellipse, the comfort ellipse, grade,
 * superelevation and resistances are written once in C as they are once in problem.py.
 */
#ifndef CURVESPEED_ACCEL_BOUNDS_H
#define CURVESPEED_ACCEL_BOUNDS_H

#include <math.h>
#include <stdint.h>

/* numpy's maximum and minimum: a NaN on either side wins */
static inline double np_max(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a > b ? a : b);
}

static inline double np_min(double a, double b)
{
    return isnan(a) || isnan(b) ? NAN : (a < b ? a : b);
}

typedef struct {                    /* SpeedProblem.accel_bounds' inputs (no power) */
    const double *kappa, *cos_bank, *sin_bank, *cos_grade, *sin_grade, *mu_long, *mu_lat;
    double g, a_lat, a_acc, a_dec, drag, rr;
} phys_t;

/* SpeedProblem.accel_bounds(b, include_power=False) at node k (b clipped at 0 as there);
 * returns the resistance per unit mass, which a power limit takes off too */
static inline double accel_bounds(const phys_t *p, int64_t k, double b, double *lo, double *hi)
{
    b = np_max(b, 0.0);
    double y = p->kappa[k] * b * p->cos_bank[k] - p->g * p->sin_bank[k];
    double r = np_max(y, 0.0) / p->a_lat;
    double c = sqrt(np_max(1.0 - r * r, 0.0));
    if (r > 1.0) c = -1.0;
    double n = p->g * p->cos_grade[k] * p->cos_bank[k] + p->kappa[k] * b * p->sin_bank[k];
    double t = y / p->mu_lat[k];
    double w2 = n * n - t * t;
    double w = p->mu_long[k] * sqrt(np_max(w2, 0.0));
    if (w2 < 0.0) w = -1.0;
    double res = p->g * p->sin_grade[k] + p->drag * b + p->rr * p->g * p->cos_grade[k];
    *lo = np_max(-p->a_dec * c, -w - res);
    *hi = np_min(p->a_acc * c, w - res);
    return res;
}

#endif

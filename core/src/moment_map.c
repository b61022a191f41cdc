/*
 * moment_map.c — between spectra and their power sums (P2, P3).
 *
 *  - d = 2 and d = 3: the spectrum from (P2, P3) through Newton's identities
 *    (e1 = 1, e2 = (1 − P2)/2, e3 = (P3 − P2 + e2)/3) and the real roots of
 *    t³ − t² + e2·t − e3 (gsl_poly_solve_cubic), and the Jacobian of that
 *    root map by implicit differentiation of Σp^k = P_k (delta method).
 *  - d >= 3: every spectrum with given (P2, P3) whose non-zero entries take
 *    at most three distinct values.  By the Lagrange conditions, the extreme
 *    values of each ordered eigenvalue over {p : Σp = 1, Σp² = P2,
 *    Σp³ = P3, p >= 0} and the maximum-entropy spectrum are of that form
 *    (the free entries solve a quadratic, resp. log p = a + b·p + c·p², with
 *    at most two, resp. three, roots), so the feasible ranges are exact
 *    minima and maxima over a finite set, found by a scan and bisection in
 *    one variable per multiplicity pattern.
 *  - the nearest physical (P2, P3) to a measured one in the metric of its
 *    covariance (Mahalanobis), over the ordered simplex parametrised as
 *    p = Σ_k α_k·(1/k,…,1/k,0,…,0), α = softmax(z) (GSL nmsimplex2).
 * Owns no memory beyond GSL minimiser state freed before returning.
 */
#include "internal.h"

#include <gsl/gsl_multimin.h>
#include <gsl/gsl_poly.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define SS__PHYS_TOL 1e-12

int ss__spectrum_from_moments(unsigned d, double p2, double p3, double *p) {
    if (d == 2) {
        double r = 2.0 * p2 - 1.0;
        int ok = r >= -SS__PHYS_TOL && p2 <= 1.0 + SS__PHYS_TOL;
        double s = sqrt(fmax(0.0, fmin(1.0, r)));
        p[0] = 0.5 * (1.0 + s);
        p[1] = 0.5 * (1.0 - s);
        return ok;
    }
    double e2 = 0.5 * (1.0 - p2);
    double e3 = (p3 - p2 + e2) / 3.0;
    double x0 = 0, x1 = 0, x2 = 0;
    int nroots = gsl_poly_solve_cubic(-1.0, e2, -e3, &x0, &x1, &x2);
    if (nroots != 3) {
        /* one real root: the other two are complex, no spectrum */
        p[0] = x0;
        p[1] = p[2] = 0.5 * (1.0 - x0);
        return 0;
    }
    p[0] = x2; /* gsl returns ascending */
    p[1] = x1;
    p[2] = x0;
    return p[2] >= -1e-9;
}

int ss__spectrum_jacobian(unsigned d, const double *p, double *G) {
    if (d == 2) {
        double r = p[0] - p[1]; /* sqrt(2 P2 − 1) */
        if (r < 1e-12)
            return 0;
        G[0] = 0.5 / r; /* dp1/dP2 */
        G[1] = 0.0;
        G[2] = -0.5 / r;
        G[3] = 0.0;
        return 1;
    }
    /* Solve A·dp = (0, dP2, dP3), A = [1 1 1; 2p 2p 2p; 3p² 3p² 3p²] */
    double a[3][3];
    for (int j = 0; j < 3; j++) {
        a[0][j] = 1.0;
        a[1][j] = 2.0 * p[j];
        a[2][j] = 3.0 * p[j] * p[j];
    }
    double det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                 a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                 a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    if (fabs(det) < 1e-300)
        return 0;
    /* dp_i = (C[1][i]·dP2 + C[2][i]·dP3)/det with cofactors C[r][c] */
    for (int i = 0; i < 3; i++) {
        int j = i == 0 ? 1 : 0, k = i == 2 ? 1 : 2;
        double sign1 = (1 + i) % 2 ? -1.0 : 1.0;
        double sign2 = (2 + i) % 2 ? -1.0 : 1.0;
        double c1 = sign1 * (a[0][j] * a[2][k] - a[0][k] * a[2][j]);
        double c2 = sign2 * (a[0][j] * a[1][k] - a[0][k] * a[1][j]);
        G[i * 2 + 0] = c1 / det;
        G[i * 2 + 1] = c2 / det;
    }
    return 1;
}

/* --- spectra with at most three distinct non-zero values ------------------ */

typedef struct {
    unsigned d;
    double p2, p3;
    size_t found;
    double lo[SS_LEVELS_MAX], hi[SS_LEVELS_MAX];
    double best_entropy;
    double maxent[SS_LEVELS_MAX];
} ss__solutions;

/* For multiplicities (m1, m2, m3) and t = v3: the two branches (v1, v2) of
 * m1 v1 + m2 v2 = 1 − m3 t, m1 v1² + m2 v2² = P2 − m3 t².  Returns 0 when the
 * branch has no non-negative real solution. */
static int ss__branch(const ss__solutions *s, unsigned m1, unsigned m2,
                      unsigned m3, int sign, double t, double *v1, double *v2) {
    double S1 = 1.0 - m3 * t, S2 = s->p2 - m3 * t * t;
    double disc = (double)m1 * m2 * ((m1 + m2) * S2 - S1 * S1);
    if (disc < 0.0 || S1 < 0.0)
        return 0;
    double u = (m2 * S1 + sign * sqrt(disc)) / ((double)m2 * (m1 + m2));
    double w = (S1 - m2 * u) / m1;
    if (u < -1e-14 || w < -1e-14)
        return 0;
    *v1 = fmax(w, 0.0);
    *v2 = fmax(u, 0.0);
    return 1;
}

static double ss__residual(const ss__solutions *s, unsigned m1, unsigned m2,
                           unsigned m3, double v1, double v2, double t) {
    return m1 * v1 * v1 * v1 + m2 * v2 * v2 * v2 + m3 * t * t * t - s->p3;
}

static void ss__record(ss__solutions *s, unsigned m1, unsigned m2, unsigned m3,
                       double v1, double v2, double t) {
    double p[SS_LEVELS_MAX] = {0};
    unsigned k = 0;
    for (unsigned i = 0; i < m1; i++)
        p[k++] = v1;
    for (unsigned i = 0; i < m2; i++)
        p[k++] = v2;
    for (unsigned i = 0; i < m3; i++)
        p[k++] = t;
    qsort(p, s->d, sizeof p[0], ss__cmp_double_desc);
    double h = 0.0;
    for (unsigned i = 0; i < s->d; i++) {
        if (s->found == 0 || p[i] < s->lo[i])
            s->lo[i] = p[i];
        if (s->found == 0 || p[i] > s->hi[i])
            s->hi[i] = p[i];
        if (p[i] > 0.0)
            h -= p[i] * log(p[i]);
    }
    if (s->found == 0 || h > s->best_entropy) {
        s->best_entropy = h;
        memcpy(s->maxent, p, s->d * sizeof p[0]);
    }
    s->found++;
}

#define SS__SCAN 512
/* A residual in P3 below this counts as a solution (P3 is O(0.1); far below
 * any statistical error of a measured P3). */
#define SS__ROOT_TOL 1e-10

/* |residual| along one branch at t, or −1 where the branch does not exist. */
static double ss__abs_residual(const ss__solutions *s, unsigned m1, unsigned m2,
                               unsigned m3, int sign, double t, double *v1,
                               double *v2) {
    if (!ss__branch(s, m1, m2, m3, sign, t, v1, v2))
        return -1.0;
    return fabs(ss__residual(s, m1, m2, m3, *v1, *v2, t));
}

/* A root where the residual touches zero without changing sign (a double
 * root: two solutions of the pattern merge, as at a tie of two values):
 * golden-section search for the minimum of |residual| on [a, b]. */
static void ss__touch_root(ss__solutions *s, unsigned m1, unsigned m2,
                           unsigned m3, int sign, double a, double b) {
    const double g = 0.6180339887498949;
    double v1, v2, x1 = b - g * (b - a), x2 = a + g * (b - a);
    double f1 = ss__abs_residual(s, m1, m2, m3, sign, x1, &v1, &v2);
    double f2 = ss__abs_residual(s, m1, m2, m3, sign, x2, &v1, &v2);
    for (int it = 0; it < 80 && f1 >= 0 && f2 >= 0; it++) {
        if (f1 < f2) {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - g * (b - a);
            f1 = ss__abs_residual(s, m1, m2, m3, sign, x1, &v1, &v2);
        } else {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + g * (b - a);
            f2 = ss__abs_residual(s, m1, m2, m3, sign, x2, &v1, &v2);
        }
    }
    double t = 0.5 * (a + b);
    double f = ss__abs_residual(s, m1, m2, m3, sign, t, &v1, &v2);
    if (f >= 0 && f < SS__ROOT_TOL)
        ss__record(s, m1, m2, m3, v1, v2, t);
}

static void ss__bisect_root(ss__solutions *s, unsigned m1, unsigned m2,
                            unsigned m3, int sign, double a, double b,
                            double fa) {
    double v1, v2;
    for (int it = 0; it < 80; it++) {
        double mid = 0.5 * (a + b), fm;
        if (!ss__branch(s, m1, m2, m3, sign, mid, &v1, &v2))
            break;
        fm = ss__residual(s, m1, m2, m3, v1, v2, mid);
        if ((fm > 0.0) == (fa > 0.0)) {
            a = mid;
            fa = fm;
        } else {
            b = mid;
        }
    }
    double tm = 0.5 * (a + b);
    if (ss__branch(s, m1, m2, m3, sign, tm, &v1, &v2) &&
        fabs(ss__residual(s, m1, m2, m3, v1, v2, tm)) < SS__ROOT_TOL)
        ss__record(s, m1, m2, m3, v1, v2, tm);
}

static void ss__scan_pattern(ss__solutions *s, unsigned m1, unsigned m2,
                             unsigned m3) {
    double tmax = 1.0 / m3;
    for (int sign = -1; sign <= 1; sign += 2) {
        double t_prev[2] = {0, 0}, f_prev[2] = {0, 0};
        int valid = 0; /* consecutive valid scan points behind this one */
        for (int i = 0; i <= SS__SCAN; i++) {
            double t = tmax * i / SS__SCAN;
            double v1, v2;
            if (!ss__branch(s, m1, m2, m3, sign, t, &v1, &v2)) {
                valid = 0;
                continue;
            }
            double f = ss__residual(s, m1, m2, m3, v1, v2, t);
            if (f == 0.0)
                ss__record(s, m1, m2, m3, v1, v2, t);
            else if (valid >= 1 && f_prev[1] != 0.0 &&
                     (f > 0.0) != (f_prev[1] > 0.0))
                ss__bisect_root(s, m1, m2, m3, sign, t_prev[1], t, f_prev[1]);
            else if (valid >= 2 && fabs(f_prev[1]) < fabs(f_prev[0]) &&
                     fabs(f_prev[1]) <= fabs(f) &&
                     (f > 0.0) == (f_prev[1] > 0.0))
                ss__touch_root(s, m1, m2, m3, sign, t_prev[0], t);
            t_prev[0] = t_prev[1];
            f_prev[0] = f_prev[1];
            t_prev[1] = t;
            f_prev[1] = f;
            valid++;
        }
    }
}

/* Spectra with two distinct non-zero values (v1 ×m1, v2 ×m2, zeros):
 * P2 fixes them, P3 must then match (the isolated ends of the solution
 * curve, e.g. (a, a, b, b)). */
static void ss__two_values(ss__solutions *s) {
    for (unsigned m1 = 1; m1 <= s->d; m1++)
        for (unsigned m2 = 1; m1 + m2 <= s->d; m2++)
            for (int sign = -1; sign <= 1; sign += 2) {
                double v1, v2;
                if (ss__branch(s, m1, m2, 0, sign, 0.0, &v1, &v2) &&
                    fabs(ss__residual(s, m1, m2, 0, v1, v2, 0.0)) <
                        SS__ROOT_TOL)
                    ss__record(s, m1, m2, 0, v1, v2, 0.0);
            }
}

size_t ss__moment_solutions(unsigned d, double p2, double p3, double *lo,
                            double *hi, double *maxent) {
    ss__solutions s;
    memset(&s, 0, sizeof s);
    s.d = d;
    s.p2 = p2;
    s.p3 = p3;
    for (unsigned m3 = 1; m3 <= d; m3++)
        for (unsigned m1 = 1; m1 + m3 < d; m1++)
            for (unsigned m2 = 1; m1 + m2 + m3 <= d; m2++)
                ss__scan_pattern(&s, m1, m2, m3);
    ss__two_values(&s);
    if (s.found > 0) {
        memcpy(lo, s.lo, d * sizeof *lo);
        memcpy(hi, s.hi, d * sizeof *hi);
        memcpy(maxent, s.maxent, d * sizeof *maxent);
    }
    return s.found;
}

size_t ss__maxent_given_p2(unsigned d, double p2, double *maxent) {
    /* entropy maximisers under Σp = 1, Σp² = P2 take at most two distinct
     * non-zero values (log p = a + b·p has at most two roots) */
    ss__solutions s;
    memset(&s, 0, sizeof s);
    s.d = d;
    s.p2 = p2;
    for (unsigned m1 = 1; m1 <= d; m1++)
        for (unsigned m2 = 1; m1 + m2 <= d; m2++)
            for (int sign = -1; sign <= 1; sign += 2) {
                double v1, v2;
                if (ss__branch(&s, m1, m2, 0, sign, 0.0, &v1, &v2))
                    ss__record(&s, m1, m2, 0, v1, v2, 0.0);
            }
    if (p2 >= 1.0 - 1e-15) { /* pure state */
        memset(maxent, 0, d * sizeof *maxent);
        maxent[0] = 1.0;
        return 1;
    }
    if (s.found > 0)
        memcpy(maxent, s.maxent, d * sizeof *maxent);
    return s.found;
}

void ss__point_spectrum(unsigned d, const double *theta, int use_p3,
                        double *p) {
    double W[4] = {1.0, 0.0, 0.0, 1.0};
    double lo[SS_LEVELS_MAX], hi[SS_LEVELS_MAX];
    if (d == 2 || (d == 3 && use_p3)) {
        if (ss__spectrum_from_moments(d, theta[0], theta[1], p))
            return;
    } else if (use_p3) {
        if (ss__moment_solutions(d, theta[0], theta[1], lo, hi, p) > 0)
            return;
    } else {
        double p2 = fmin(1.0, fmax(1.0 / d, theta[0]));
        if (ss__maxent_given_p2(d, p2, p) > 0)
            return;
    }
    ss__nearest_physical(d, theta, W, use_p3, p);
}

/* --- the ordered simplex and the nearest physical point ------------------ */

void ss__simplex_from_z(unsigned d, const double *z, double *p) {
    double alpha[SS_LEVELS_MAX], zmax = 0.0, sum = 0.0;
    for (unsigned k = 0; k + 1 < d; k++)
        zmax = fmax(zmax, z[k]);
    for (unsigned k = 0; k < d; k++) {
        alpha[k] = exp((k + 1 < d ? z[k] : 0.0) - zmax);
        sum += alpha[k];
    }
    double acc = 0.0;
    for (unsigned i = d; i-- > 0;) {
        acc += alpha[i] / sum / (double)(i + 1);
        p[i] = acc;
    }
}

void ss__z_from_simplex(unsigned d, const double *p, double *z) {
    double alpha[SS_LEVELS_MAX];
    for (unsigned k = 0; k < d; k++) {
        double next = k + 1 < d ? p[k + 1] : 0.0;
        alpha[k] = fmax((double)(k + 1) * (p[k] - next), 1e-12);
    }
    for (unsigned k = 0; k + 1 < d; k++)
        z[k] = log(alpha[k]) - log(alpha[d - 1]);
}

typedef struct {
    unsigned d;
    int use_p3;
    double theta[2];
    double W[4];
} ss__nearest_ctx;

static double ss__nearest_objective(const gsl_vector *v, void *params) {
    const ss__nearest_ctx *c = params;
    double z[SS_LEVELS_MAX], p[SS_LEVELS_MAX];
    for (unsigned k = 0; k + 1 < c->d; k++)
        z[k] = gsl_vector_get(v, k);
    ss__simplex_from_z(c->d, z, p);
    double r0 = c->theta[0] - ss_spectrum_power_sum(p, c->d, 2);
    if (!c->use_p3)
        return r0 * r0 * c->W[0];
    double r1 = c->theta[1] - ss_spectrum_power_sum(p, c->d, 3);
    return r0 * r0 * c->W[0] + 2.0 * r0 * r1 * c->W[1] + r1 * r1 * c->W[3];
}

/* d = 3: the region of (P2, P3) is bounded by three one-parameter families
 * of spectra, where the map p -> (P2, P3) loses rank: two equal small
 * eigenvalues (t, (1−t)/2, (1−t)/2), two equal large ones (t, t, 1−2t), and
 * a zero eigenvalue (t, 1−t, 0).  A point outside is nearest to one of them:
 * a scan and a golden-section refinement on each. */
static void ss__family3(int fam, double t, double *p) {
    if (fam == 0) {
        p[0] = t;
        p[1] = p[2] = 0.5 * (1.0 - t);
    } else if (fam == 1) {
        p[0] = p[1] = t;
        p[2] = 1.0 - 2.0 * t;
    } else {
        p[0] = t;
        p[1] = 1.0 - t;
        p[2] = 0.0;
    }
}

static double ss__family3_q(const ss__nearest_ctx *c, int fam, double t) {
    double p[3];
    ss__family3(fam, t, p);
    double r0 = c->theta[0] - ss_spectrum_power_sum(p, 3, 2);
    double r1 = c->theta[1] - ss_spectrum_power_sum(p, 3, 3);
    return r0 * r0 * c->W[0] + 2.0 * r0 * r1 * c->W[1] + r1 * r1 * c->W[3];
}

static double ss__nearest_d3(const ss__nearest_ctx *c, double *p_star) {
    static const double range[3][2] = {
        {1.0 / 3.0, 1.0}, {1.0 / 3.0, 0.5}, {0.5, 1.0}};
    const double g = 0.6180339887498949;
    double best = HUGE_VAL;
    for (int fam = 0; fam < 3; fam++) {
        double lo = range[fam][0], hi = range[fam][1];
        int n = 200, arg = 0;
        double bq = HUGE_VAL;
        for (int i = 0; i <= n; i++) {
            double q = ss__family3_q(c, fam, lo + (hi - lo) * i / n);
            if (q < bq) {
                bq = q;
                arg = i;
            }
        }
        double a = lo + (hi - lo) * (arg > 0 ? arg - 1 : 0) / n;
        double b = lo + (hi - lo) * (arg < n ? arg + 1 : n) / n;
        double x1 = b - g * (b - a), x2 = a + g * (b - a);
        double f1 = ss__family3_q(c, fam, x1), f2 = ss__family3_q(c, fam, x2);
        for (int it = 0; it < 60; it++) {
            if (f1 < f2) {
                b = x2;
                x2 = x1;
                f2 = f1;
                x1 = b - g * (b - a);
                f1 = ss__family3_q(c, fam, x1);
            } else {
                a = x1;
                x1 = x2;
                f1 = f2;
                x2 = a + g * (b - a);
                f2 = ss__family3_q(c, fam, x2);
            }
        }
        double t = 0.5 * (a + b), q = ss__family3_q(c, fam, t);
        if (bq < q) { /* an end point of the family */
            t = lo + (hi - lo) * arg / n;
            q = bq;
        }
        if (q < best) {
            best = q;
            ss__family3(fam, t, p_star);
        }
    }
    return sqrt(fmax(best, 0.0));
}

double ss__nearest_physical(unsigned d, const double theta[2],
                            const double W[4], int use_p3, double *p_star) {
    ss__nearest_ctx c = {d, use_p3, {theta[0], theta[1]}, {0}};
    memcpy(c.W, W, sizeof c.W);
    if (d == 3 && use_p3)
        return ss__nearest_d3(&c, p_star);
    size_t dim = d - 1;
    gsl_multimin_function f = {ss__nearest_objective, dim, &c};
    const gsl_multimin_fminimizer_type *T = gsl_multimin_fminimizer_nmsimplex2;
    gsl_multimin_fminimizer *m = gsl_multimin_fminimizer_alloc(T, dim);
    gsl_vector *x = gsl_vector_alloc(dim), *step = gsl_vector_alloc(dim);
    double best = HUGE_VAL;
    if (m == NULL || x == NULL || step == NULL)
        goto done;
    for (unsigned start = 0; start <= d; start++) {
        for (size_t k = 0; k < dim; k++)
            gsl_vector_set(x, k,
                           start < d ? (k == start ? 6.0 : 0.0)
                                     : (start == d ? -3.0 : 0.0));
        gsl_vector_set_all(step, 1.0);
        /* a start where the objective is not finite leaves the minimiser
         * half set up: skip it */
        if (gsl_multimin_fminimizer_set(m, &f, x, step) != GSL_SUCCESS)
            continue;
        for (int it = 0; it < 1500; it++) {
            if (gsl_multimin_fminimizer_iterate(m) != GSL_SUCCESS)
                break;
            if (gsl_multimin_test_size(gsl_multimin_fminimizer_size(m), 1e-9) ==
                GSL_SUCCESS)
                break;
        }
        double val = gsl_multimin_fminimizer_minimum(m);
        if (val < best) {
            best = val;
            double z[SS_LEVELS_MAX];
            for (size_t k = 0; k < dim; k++)
                z[k] = gsl_vector_get(m->x, k);
            ss__simplex_from_z(d, z, p_star);
        }
    }
done:
    if (!isfinite(best)) /* no start worked: a defined point, no distance */
        for (unsigned i = 0; i < d; i++)
            p_star[i] = 1.0 / d;
    gsl_multimin_fminimizer_free(m);
    gsl_vector_free(x);
    gsl_vector_free(step);
    return isfinite(best) ? sqrt(fmax(best, 0.0)) : nan("");
}

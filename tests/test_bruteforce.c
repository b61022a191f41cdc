/*
 * test_bruteforce.c — brute-force cross-check of the core against the
 * Hamiltonian itself.  For small (d, n) it builds S = Σ_{j<k} SWAP_jk on
 * (C^d)^{⊗n} as a dense real symmetric d^n × d^n matrix, diagonalises it with
 * GSL (gsl_eigen_symmv) and checks (a) the eigenvalues are the contents c(λ)
 * with multiplicity f^λ·dim_d(λ) (statistics-sources.md §3.2; domain.md §5),
 * (b) for ρ = O·diag(p)·Oᵀ with a random orthogonal O (non-diagonal
 * eigenbasis), the weights tr(ρ^{⊗n} Π_c) of the eigenspaces equal the
 * core's P_n summed over diagrams of content c, and (c) their mean and
 * variance equal the closed forms of domain.md §2.  Owns nothing outside
 * this file; every matrix is freed at the end of each case.
 */
#include <gsl/gsl_blas.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "testutil.h"

TestSuite(bruteforce, .init = tu_quiet_gsl, .timeout = 120);

static size_t ipow(unsigned d, unsigned n) {
    size_t v = 1;
    for (unsigned i = 0; i < n; ++i)
        v *= d;
    return v;
}

/* S[y][x] = number of pairs j<k with swap_jk(x) = y, basis x = Σ x_i d^i. */
static gsl_matrix *build_swap_sum(unsigned d, unsigned n) {
    size_t dim = ipow(d, n);
    gsl_matrix *s = gsl_matrix_calloc(dim, dim);
    cr_assert(s != NULL);
    unsigned digits[16];
    for (size_t x = 0; x < dim; ++x) {
        size_t t = x;
        for (unsigned i = 0; i < n; ++i) {
            digits[i] = (unsigned)(t % d);
            t /= d;
        }
        for (unsigned j = 0; j < n; ++j) {
            for (unsigned k = j + 1; k < n; ++k) {
                size_t y = x;
                size_t wj = ipow(d, j), wk = ipow(d, k);
                y -= digits[j] * wj + digits[k] * wk;
                y += digits[k] * wj + digits[j] * wk;
                gsl_matrix_set(s, y, x, gsl_matrix_get(s, y, x) + 1.0);
            }
        }
    }
    return s;
}

/* ρ^{⊗n} by repeated Kronecker products. */
static gsl_matrix *tensor_power(const gsl_matrix *rho, unsigned n) {
    size_t d = rho->size1;
    gsl_matrix *acc = gsl_matrix_alloc(d, d);
    gsl_matrix_memcpy(acc, rho);
    for (unsigned m = 1; m < n; ++m) {
        size_t a = acc->size1;
        gsl_matrix *next = gsl_matrix_alloc(a * d, a * d);
        cr_assert(next != NULL);
        for (size_t i = 0; i < a; ++i)
            for (size_t j = 0; j < a; ++j) {
                double v = gsl_matrix_get(acc, i, j);
                for (size_t k = 0; k < d; ++k)
                    for (size_t l = 0; l < d; ++l)
                        gsl_matrix_set(next, i * d + k, j * d + l,
                                       v * gsl_matrix_get(rho, k, l));
            }
        gsl_matrix_free(acc);
        acc = next;
    }
    return acc;
}

/* ρ = O·diag(p)·Oᵀ, O the Q factor of a Gaussian matrix (Haar up to signs),
 * p uniform on the simplex; both from the seeded generator. */
static gsl_matrix *random_state(gsl_rng *rng, unsigned d, double *p) {
    gsl_matrix *g = gsl_matrix_alloc(d, d), *q = gsl_matrix_alloc(d, d),
               *r = gsl_matrix_alloc(d, d), *rho = gsl_matrix_calloc(d, d);
    gsl_vector *tau = gsl_vector_alloc(d);
    for (unsigned i = 0; i < d; ++i)
        for (unsigned j = 0; j < d; ++j)
            gsl_matrix_set(g, i, j, gsl_ran_gaussian(rng, 1.0));
    cr_assert(gsl_linalg_QR_decomp(g, tau) == GSL_SUCCESS);
    cr_assert(gsl_linalg_QR_unpack(g, tau, q, r) == GSL_SUCCESS);
    tu_random_simplex(rng, d, p);
    double offdiag = 0.0;
    for (unsigned i = 0; i < d; ++i)
        for (unsigned j = 0; j < d; ++j) {
            double v = 0.0;
            for (unsigned k = 0; k < d; ++k)
                v += gsl_matrix_get(q, i, k) * p[k] * gsl_matrix_get(q, j, k);
            gsl_matrix_set(rho, i, j, v);
            if (i != j && fabs(v) > offdiag)
                offdiag = fabs(v);
        }
    cr_assert(offdiag > 1e-3,
              "random ρ came out (nearly) diagonal: max off-diagonal %g",
              offdiag);
    gsl_matrix_free(g);
    gsl_matrix_free(q);
    gsl_matrix_free(r);
    gsl_vector_free(tau);
    return rho;
}

static void run_case(unsigned d, unsigned n, unsigned long seed) {
    size_t dim = ipow(d, n);
    long pairs = (long)n * ((long)n - 1) / 2;
    size_t span =
        (size_t)(2 * pairs + 1); /* contents lie in [−C(n,2), C(n,2)] */

    /* (a) spectrum of S */
    gsl_matrix *s = build_swap_sum(d, n);
    gsl_vector *eval = gsl_vector_alloc(dim);
    gsl_matrix *evec = gsl_matrix_alloc(dim, dim);
    gsl_eigen_symmv_workspace *ws = gsl_eigen_symmv_alloc(dim);
    cr_assert(gsl_eigen_symmv(s, eval, evec, ws) == GSL_SUCCESS,
              "gsl_eigen_symmv failed");
    gsl_eigen_symmv_free(ws);
    gsl_matrix_free(s);

    uint64_t *mult_bf = calloc(span, sizeof(uint64_t));
    uint64_t *mult_core = calloc(span, sizeof(uint64_t));
    double *w_bf = calloc(span, sizeof(double));
    long *label = malloc(dim * sizeof(long));
    cr_assert(mult_bf && mult_core && w_bf && label);
    for (size_t i = 0; i < dim; ++i) {
        double e = gsl_vector_get(eval, i);
        double c = nearbyint(e);
        /* integer eigenvalues: a dense solver lands within ~1e-12 of them */
        cr_assert(fabs(e - c) < 1e-8,
                  "(d=%u,n=%u): eigenvalue %.17g is not an integer", d, n, e);
        cr_assert(fabs(c) <= (double)pairs,
                  "(d=%u,n=%u): eigenvalue %g out of range", d, n, c);
        label[i] = (long)c;
        mult_bf[label[i] + pairs] += 1;
    }

    /* core side: Σ over diagrams with content c of f^λ·dim_d(λ) */
    ss_diagram_set *set = tu_diagram_set(n, d);
    uint64_t total = 0;
    for (size_t i = 0; i < set->count; ++i) {
        const uint32_t *r = set->rows + i * d;
        uint64_t m = tu_round_count(ss_diagram_log_tableaux(r, d) +
                                        ss_diagram_log_dimension(r, d, d),
                                    "f^λ·dim");
        mult_core[set->content[i] + pairs] += m;
        total += m;
    }
    ss_diagram_set_free(set);
    cr_assert(total == dim,
              "(d=%u,n=%u): Σ f^λ·dim = %" PRIu64 ", expected d^n = %zu", d, n,
              total, dim);
    for (size_t c = 0; c < span; ++c)
        cr_expect(mult_bf[c] == mult_core[c],
                  "(d=%u,n=%u): eigenvalue %ld has multiplicity %" PRIu64
                  " (brute force), core predicts %" PRIu64,
                  d, n, (long)c - pairs, mult_bf[c], mult_core[c]);

    /* (b) weights of the eigenspaces for a state with a non-diagonal eigenbasis
     */
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    double p[SS_LEVELS_MAX];
    gsl_matrix *rho = random_state(rng, d, p);
    gsl_rng_free(rng);
    gsl_matrix *big = tensor_power(rho, n);
    gsl_matrix *kv = gsl_matrix_alloc(dim, dim);
    gsl_blas_dgemm(CblasNoTrans, CblasNoTrans, 1.0, big, evec, 0.0, kv);
    for (size_t i = 0; i < dim; ++i) {
        double w = 0.0; /* vᵢᵀ ρ^{⊗n} vᵢ */
        for (size_t r = 0; r < dim; ++r)
            w += gsl_matrix_get(evec, r, i) * gsl_matrix_get(kv, r, i);
        w_bf[label[i] + pairs] += w;
    }
    double tr_r2 = 0.0, tr_r3 = 0.0; /* tr ρ², tr ρ³ from the matrix itself */
    for (unsigned i = 0; i < d; ++i)
        for (unsigned j = 0; j < d; ++j) {
            tr_r2 += gsl_matrix_get(rho, i, j) * gsl_matrix_get(rho, j, i);
            for (unsigned k = 0; k < d; ++k)
                tr_r3 += gsl_matrix_get(rho, i, j) * gsl_matrix_get(rho, j, k) *
                         gsl_matrix_get(rho, k, i);
        }
    gsl_matrix_free(kv);
    gsl_matrix_free(big);
    gsl_matrix_free(rho);

    ss_distribution *dist = tu_distribution(n, d, p);
    ss_levels *lv = tu_levels(dist);
    double *w_core = calloc(span, sizeof(double));
    cr_assert(w_core != NULL);
    for (size_t g = 0; g < lv->count; ++g) {
        cr_assert(lv->content[g] >= -pairs && lv->content[g] <= pairs,
                  "content out of range");
        w_core[lv->content[g] + pairs] = lv->probability[g];
    }
    double wsum = 0.0, mean = 0.0;
    for (size_t c = 0; c < span; ++c) {
        /* tr(ρ^{⊗n} Π_c) = Σ_{λ: c(λ)=c} f^λ s_λ(p): 1e-10 absolute */
        cr_expect(
            fabs(w_bf[c] - w_core[c]) <= 1e-10,
            "(d=%u,n=%u): weight of content %ld: brute force %.17g, core %.17g",
            d, n, (long)c - pairs, w_bf[c], w_core[c]);
        if (mult_bf[c] == 0)
            cr_expect(w_core[c] == 0.0,
                      "core gives mass to a content with no eigenvector");
        wsum += w_bf[c];
        mean += ((double)c - (double)pairs) * w_bf[c];
    }
    double var = 0.0;
    for (size_t c = 0; c < span; ++c) {
        double dc = (double)c - (double)pairs - mean;
        var += dc * dc * w_bf[c];
    }
    cr_expect(fabs(wsum - 1.0) <= 1e-10, "(d=%u,n=%u): tr ρ^{⊗n} = %.17g", d, n,
              wsum);

    /* (c) closed forms of domain.md §2 against the brute-force moments; the
     * power sums from ρ's matrix must also equal those from p.  1e-9. */
    double p2 = ss_spectrum_power_sum(p, d, 2),
           p3 = ss_spectrum_power_sum(p, d, 3);
    cr_expect(tu_close(p2, tr_r2, 1e-12) && tu_close(p3, tr_r3, 1e-12),
              "power sums: P2 %.17g vs tr ρ² %.17g, P3 %.17g vs tr ρ³ %.17g",
              p2, tr_r2, p3, tr_r3);
    double cm = ss_content_mean(n, tr_r2),
           cv = ss_content_variance(n, tr_r2, tr_r3);
    cr_expect(tu_close(mean, cm, 1e-9),
              "(d=%u,n=%u): brute-force mean %.17g, closed form %.17g", d, n,
              mean, cm);
    cr_expect(tu_close(var, cv, 1e-9),
              "(d=%u,n=%u): brute-force variance %.17g, closed form %.17g", d,
              n, var, cv);

    ss_levels_free(lv);
    ss_distribution_free(dist);
    free(w_core);
    free(mult_bf);
    free(mult_core);
    free(w_bf);
    free(label);
    gsl_vector_free(eval);
    gsl_matrix_free(evec);
}

Test(bruteforce, qubits) {
    for (unsigned n = 2; n <= 6; ++n)
        run_case(2, n, 1000UL + n);
}

Test(bruteforce, qutrits_small) {
    for (unsigned n = 2; n <= 5; ++n)
        run_case(3, n, 2000UL + n);
}

Test(bruteforce, qutrits_six_atoms) { run_case(3, 6, 3006UL); }

Test(bruteforce, four_levels_four_atoms) { run_case(4, 4, 4004UL); }

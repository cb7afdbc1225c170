/* test_series.c -- the series core (lvs_series_*) without Lua: sparse
 * oscillator series, a degenerate pair, states, flags and error paths. */
#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double rel(double a, double b) { return fabs(a - b) / fmax(fabs(b), 1e-300); }

/* a plain n x n matrix from a row-major table */
static lvs_matrix *from_rows(lvs_ctx *ctx, size_t n, const double *rows) {
  lvs_matrix *m = NULL;
  if (lvs_matrix_new(ctx, n, n, 0, &m)) return NULL;
  for (size_t i = 0; i < n; i++)
    for (size_t j = 0; j < n; j++) lvs_matrix_set(m, i, j, rows[i * n + j], 0.0);
  return m;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  CHECK(ctx != NULL, "context");

  /* Quartic oscillator ground level, p^2/2 + x^2/2 + lambda x^4, on a sparse
   * x^4 of a padded oscillator: E = 1/2 + 3/4 l - 21/8 l^2 + 333/16 l^3
   * - 30885/128 l^4 (Bender & Wu, Phys. Rev. 184, 1231 (1969)) */
  {
    lvs_basis *o;
    lvs_matrix *x, *x4, *num, *h0;
    CHECK(lvs_basis_oscillator(ctx, 200, LVS_DEFAULT_PAD, &o) == LVS_OK, "oscillator");
    lvs_basis_op(o, 0, "x", &x);
    lvs_basis_op(o, 0, "number", &num);
    CHECK(lvs_matrix_pow(x, 4, &x4) == LVS_OK, "x^4");
    double one[2] = {1, 0}, half[2] = {0.5, 0};
    lvs_matrix *id;
    lvs_basis_op(o, 0, "identity", &id);
    CHECK(lvs_matrix_add(one, num, half, id, &h0) == LVS_OK, "H0");
    lvs_series *s = NULL;
    size_t lev = 0;
    CHECK(lvs_series_new(h0, x4, 12, &lev, 1, 1e-10, 0, &s) == LVS_OK, "series: %s", lvs_errmsg(ctx));
    const double ref[] = {0.5, 0.75, -21.0 / 8, 333.0 / 16, -30885.0 / 128};
    for (int k = 0; k <= 4; k++) {
      double e;
      CHECK(lvs_series_energy(s, 0, k, &e) == LVS_OK, "energy");
      CHECK(rel(e, ref[k]) < 1e-12, "E(%d) = %.17g, want %.17g", k, e, ref[k]);
    }
    CHECK(lvs_series_has(s, 0) && !lvs_series_has(s, 1), "only level 1 computed");
    double e;
    CHECK(lvs_series_energy(s, 1, 1, &e) == LVS_ERANGE, "level 2 not computed");
    CHECK(strstr(lvs_errmsg(ctx), "level 2 was not computed") != NULL, "message: %s", lvs_errmsg(ctx));
    CHECK(lvs_series_energy(s, 0, 13, &e) == LVS_ERANGE, "order beyond K");
    /* intermediate normalization: <0|psi(k)> = 0 for k >= 1, psi(0) = |0>
     * (Hirschfelder, Byers Brown, Epstein, Adv. Quantum Chem. 1, 255 (1964)) */
    double psi[2 * 200];
    CHECK(lvs_series_state(s, 0, 0, psi) == LVS_OK, "state 0");
    CHECK(psi[0] == 1.0 && psi[2] == 0.0, "psi(0) = |0>");
    CHECK(lvs_series_state(s, 0, 3, psi) == LVS_OK, "state 3");
    CHECK(psi[0] == 0.0, "<0|psi(3)> = 0");
    /* first-order state: psi(1)_m = V_m0 / (E_0 - E_m): m = 2 gives
     * <2|x^4|0> / (-2) with <2|x^4|0> = 3 sqrt(2) / 2 (common practice) */
    CHECK(lvs_series_state(s, 0, 1, psi) == LVS_OK, "state 1");
    CHECK(rel(psi[2 * 2], -3.0 * sqrt(2.0) / 4.0) < 1e-13, "psi(1)_2 = %.17g", psi[4]);
    int so;
    double md;
    size_t g;
    int split;
    CHECK(lvs_series_info(s, 0, &g, &split, &md, &so) == LVS_OK, "info");
    CHECK(g == 0 && split == 0 && so == 12 && fabs(md - 1.0) < 1e-15, "info values");
    lvs_series_free(s);

    /* energies only: the same numbers, no states */
    CHECK(lvs_series_new(h0, x4, 6, &lev, 1, 1e-10, LVS_SERIES_NO_STATES, &s) == LVS_OK, "no states");
    CHECK(lvs_series_energy(s, 0, 4, &e) == LVS_OK && rel(e, ref[4]) < 1e-12, "E(4) without states");
    CHECK(lvs_series_state(s, 0, 1, psi) == LVS_ERANGE, "no state kept");
    lvs_series_free(s);
    lvs_matrix_free(x), lvs_matrix_free(x4), lvs_matrix_free(num), lvs_matrix_free(h0), lvs_matrix_free(id);
    lvs_basis_free(o);
  }

  /* A degenerate pair that first order leaves alone and second order splits:
   * H0 = diag(0, 0, 1), V_PP = c 1, couplings a, b to the third state. The
   * second-order matrix -[a;b][a b] has eigenvalues -(a^2+b^2) and 0 (from
   * memory; METHODS.md sec. 2). The dark combination (b, -a)/5 is an exact
   * eigenvector of H0 + lambda V with eigenvalue c lambda (common practice). */
  {
    const double a = 0.3, b = 0.4, c = 0.2;
    const double h0r[] = {0, 0, 0, 0, 0, 0, 0, 0, 1};
    const double vr[] = {c, 0, a, 0, c, b, a, b, 0};
    lvs_matrix *h0 = from_rows(ctx, 3, h0r), *v = from_rows(ctx, 3, vr);
    lvs_series *s = NULL;
    CHECK(lvs_series_new(h0, v, 5, NULL, 0, 1e-10, 0, &s) == LVS_OK, "degenerate: %s", lvs_errmsg(ctx));
    double e1, e2;
    lvs_series_energy(s, 0, 1, &e1);
    lvs_series_energy(s, 0, 2, &e2);
    CHECK(rel(e1, c) < 1e-13 && rel(e2, -(a * a + b * b)) < 1e-13, "bright member: %g %g", e1, e2);
    /* the dark combination (b, -a)/5 decouples exactly: E = c lambda to all orders */
    for (int k = 2; k <= 5; k++) {
      lvs_series_energy(s, 1, k, &e2);
      CHECK(fabs(e2) < 1e-14, "dark member E(%d) = %g", k, e2);
    }
    int split, so;
    lvs_series_info(s, 0, NULL, &split, NULL, &so);
    CHECK(split == 2 && so == 3, "split at 2, states to 5 - 2 = 3: %d %d", split, so);
    double psi[6];
    CHECK(lvs_series_state(s, 1, 0, psi) == LVS_OK, "dark state");
    CHECK(fabs(fabs(psi[0]) - 0.8) < 1e-13 && fabs(fabs(psi[2]) - 0.6) < 1e-13 && psi[0] * psi[2] < 0, "dark (b,-a)/5");
    CHECK(lvs_series_state(s, 1, 4, psi) == LVS_ERANGE, "state beyond its order");
    CHECK(strstr(lvs_errmsg(ctx), "available to order 3") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_series_free(s);

    /* errors: sizes, Hermiticity, order, tolerance, level */
    lvs_matrix *small = from_rows(ctx, 2, (const double[]){1, 0, 0, 1});
    CHECK(lvs_series_new(h0, small, 2, NULL, 0, 1e-10, 0, &s) == LVS_EDIM && s == NULL, "V size");
    CHECK(strstr(lvs_errmsg(ctx), "V is 2x2 but H0 is 3x3") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix_set(v, 0, 1, 0.5, 0.0);
    CHECK(lvs_series_new(h0, v, 2, NULL, 0, 1e-10, 0, &s) == LVS_ENOTHERM, "non-Hermitian V");
    CHECK(strstr(lvs_errmsg(ctx), "V is not Hermitian") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix_set(v, 0, 1, 0.0, 0.0);
    CHECK(lvs_series_new(h0, v, 0, NULL, 0, 1e-10, 0, &s) == LVS_ERANGE, "order 0");
    CHECK(lvs_series_new(h0, v, 1001, NULL, 0, 1e-10, 0, &s) == LVS_ERANGE, "order 1001");
    CHECK(lvs_series_new(h0, v, 2, NULL, 0, 0.9, 0, &s) == LVS_EINVAL, "degen_tol");
    size_t bad = 3;
    CHECK(lvs_series_new(h0, v, 2, &bad, 1, 1e-10, 0, &s) == LVS_ERANGE, "level out of range");
    CHECK(strstr(lvs_errmsg(ctx), "level 4 is out of range 1..3") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix_free(small), lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  /* Complex Hermitian, non-diagonal H0: E(1) = <n|V|n> in H0's eigenbasis
   * and E(2) = sum |V_mn|^2 / (E_n - E_m) (textbook RS, common practice),
   * for H0 = [[1, .2], [.2, 3]] and V = [[.1, -.3i], [.3i, -.1]]. */
  {
    lvs_matrix *h0 = from_rows(ctx, 2, (const double[]){1, 0.2, 0.2, 3}), *v = NULL;
    lvs_matrix_new(ctx, 2, 2, 1, &v);
    lvs_matrix_set(v, 0, 0, 0.1, 0), lvs_matrix_set(v, 1, 1, -0.1, 0);
    lvs_matrix_set(v, 0, 1, 0, -0.3), lvs_matrix_set(v, 1, 0, 0, 0.3);
    lvs_series *s = NULL;
    CHECK(lvs_series_new(h0, v, 4, NULL, 0, 1e-10, LVS_SERIES_NORMALIZED, &s) == LVS_OK, "complex");
    double E0 = 2 - sqrt(1 + 0.04), E1 = 2 + sqrt(1 + 0.04);
    /* eigenvectors of H0 by hand: the lower one solves (1 - E0) u0 + 0.2 u1 = 0 */
    double u0 = 0.2, u1 = E0 - 1, nn = hypot(u0, u1);
    u0 /= nn, u1 /= nn;
    double w0 = -u1, w1 = u0;
    double complex V00 = 0.1 * u0 * u0 - 0.1 * u1 * u1 + (-0.3 * I) * u0 * u1 + (0.3 * I) * u1 * u0;
    double complex V10 = 0.1 * w0 * u0 - 0.1 * w1 * u1 + (-0.3 * I) * w0 * u1 + (0.3 * I) * w1 * u0;
    double e0, e1, e2;
    lvs_series_energy(s, 0, 0, &e0);
    lvs_series_energy(s, 0, 1, &e1);
    lvs_series_energy(s, 0, 2, &e2);
    CHECK(fabs(e0 - E0) < 1e-14 && fabs(e1 - creal(V00)) < 1e-14, "E0, E1: %g %g", e0, e1);
    CHECK(fabs(e2 - cabs(V10) * cabs(V10) / (E0 - E1)) < 1e-14, "E2 = %g", e2);
    lvs_series_free(s);
    lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  lvs_series_free(NULL);
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  return failures ? 1 : 0;
}

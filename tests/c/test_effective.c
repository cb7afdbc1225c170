/* test_effective.c -- the effective-Hamiltonian core without Lua: the
 * sparse path of a diagonal H0 against the dense eigenbasis path
 * (LVS_EFFECTIVE_DENSE) on several models, real and complex V, degenerate
 * and non-degenerate groups, sparse, dense and padded storage; the
 * second-order formula; error paths of the sparse path. */
#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

/* every term of a and b equal to tol relative to the term's largest entry */
static void same_terms(const lvs_effective *a, const lvs_effective *b, double tol, const char *what) {
  CHECK(lvs_effective_dim(a) == lvs_effective_dim(b), "%s: dims", what);
  size_t d = lvs_effective_dim(a);
  for (size_t i = 0; i < d; i++)
    CHECK(lvs_effective_levels(a)[i] == lvs_effective_levels(b)[i], "%s: group", what);
  CHECK(strcmp(lvs_effective_warnings(a), lvs_effective_warnings(b)) == 0, "%s: warnings '%s' vs '%s'", what,
        lvs_effective_warnings(a), lvs_effective_warnings(b));
  for (int k = 0; k <= lvs_effective_order(a); k++) {
    lvs_matrix *ta = NULL, *tb = NULL;
    CHECK(lvs_effective_term(a, k, &ta) == LVS_OK && lvs_effective_term(b, k, &tb) == LVS_OK, "%s: term", what);
    if (!ta || !tb) {
      lvs_matrix_free(ta), lvs_matrix_free(tb);
      continue;
    }
    CHECK(lvs_matrix_is_complex(ta) == lvs_matrix_is_complex(tb), "%s: order %d real/complex differ", what, k);
    double big = 0, worst = 0;
    for (size_t i = 0; i < d; i++)
      for (size_t j = 0; j < d; j++) {
        double ar, ai, br, bi;
        lvs_matrix_get(ta, i, j, &ar, &ai);
        lvs_matrix_get(tb, i, j, &br, &bi);
        big = fmax(big, cabs(CMPLX(br, bi)));
        worst = fmax(worst, cabs(CMPLX(ar - br, ai - bi)));
      }
    CHECK(worst <= tol * fmax(big, 1e-300), "%s: order %d differs by %.3g (largest entry %.3g)", what, k, worst,
          big);
    lvs_matrix_free(ta), lvs_matrix_free(tb);
  }
}

/* sparse path (default for a diagonal H0) and dense path on the same input */
static void both_paths(const lvs_matrix *h0, const lvs_matrix *v, const size_t *lv, size_t d, int K,
                       const char *what) {
  lvs_effective *s = NULL, *dn = NULL;
  int a = lvs_effective_new(h0, v, lv, d, K, &s);
  int b = lvs_effective_new_ex(h0, v, lv, d, K, LVS_EFFECTIVE_DENSE, &dn);
  CHECK(a == LVS_OK && b == LVS_OK, "%s: build %d %d", what, a, b);
  if (s && dn) same_terms(s, dn, 1e-12, what);
  lvs_effective_free(s);
  lvs_effective_free(dn);
}

/* qubit (spin 1/2) x oscillator of N levels, index s*N + m (s = 0: up),
 * H0 = w m + (D/2)(1 - 2s) on the diagonal, V = g sigma_x (a + a^+) (Rabi)
 * or g (sigma_+ a + sigma_- a^+) (Jaynes-Cummings, rwa = 1); invented
 * parameters */
static void qubit_osc(lvs_ctx *ctx, size_t N, double w, double D, double g, int rwa, lvs_matrix **h0,
                      lvs_matrix **v) {
  lvs_matrix_new_sparse(ctx, 2 * N, 2 * N, 0, h0);
  lvs_matrix_new_sparse(ctx, 2 * N, 2 * N, 0, v);
  for (size_t s = 0; s < 2; s++)
    for (size_t m = 0; m < N; m++) lvs_matrix_set(*h0, s * N + m, s * N + m, w * m + 0.5 * D * (s ? -1 : 1), 0);
  for (size_t m = 0; m + 1 < N; m++) {
    double c = g * sqrt((double)(m + 1));
    /* up,m <-> down,m+1 (counter-rotating: dropped by the RWA) and
     * down,m <-> up,m+1 (sigma_+ a: kept) */
    if (!rwa) {
      lvs_matrix_set(*v, m, N + m + 1, c, 0);
      lvs_matrix_set(*v, N + m + 1, m, c, 0);
    }
    lvs_matrix_set(*v, N + m, m + 1, c, 0);
    lvs_matrix_set(*v, m + 1, N + m, c, 0);
  }
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  CHECK(ctx != NULL, "context");

  /* 1. Rabi qubit x oscillator, non-degenerate pair of levels, real V */
  {
    lvs_matrix *h0, *v;
    qubit_osc(ctx, 20, 1.0, 0.6, 0.05, 0, &h0, &v);
    size_t lv[] = {0, 1};
    both_paths(h0, v, lv, 2, 6, "rabi, levels 1-2, order 6");
    size_t lv3[] = {4, 2, 3}; /* unsorted on input */
    both_paths(h0, v, lv3, 3, 5, "rabi, levels 3-5, order 5");
    /* second order: H(2)_aa = sum_m |V_am|^2 / (E_a - E_m) (Winkler,
     * Spin-Orbit Coupling Effects in Two-Dimensional Electron and Hole
     * Systems (Springer 2003), App. B, from memory). Level 1 = |down, 0>
     * (E = -D/2) couples only to |up, 1> (E = w + D/2) with V = g. */
    lvs_effective *e = NULL;
    CHECK(lvs_effective_new(h0, v, lv, 2, 2, &e) == LVS_OK, "rabi order 2: %s", lvs_errmsg(ctx));
    lvs_matrix *t = NULL;
    if (e && lvs_effective_term(e, 2, &t) == LVS_OK) {
      double re, im, want0 = -0.05 * 0.05 / (1.0 + 0.6), want1 = -0.05 * 0.05 / (1.0 - 0.6);
      lvs_matrix_get(t, 0, 0, &re, &im);
      CHECK(fabs(re - want0) < 1e-16, "H(2)_11 = %.17g, want %.17g", re, want0);
      lvs_matrix_get(t, 1, 1, &re, &im);
      CHECK(fabs(re - want1) < 1e-16, "H(2)_22 = %.17g, want %.17g", re, want1);
      CHECK(lvs_effective_state(e, 0) == 20 && lvs_effective_state(e, 1) == 0, "states of the group");
    }
    lvs_matrix_free(t);
    lvs_effective_free(e);
    lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  /* 2. complex sparse V, degenerate group, basis not in energy order:
   * E_i = 0.5 (i mod 7) on 40 states; the lowest level is 6-fold (states 0,
   * 7, ..., 35); invented couplings on offsets 1, 3 and 8 */
  {
    size_t n = 40;
    lvs_matrix *h0, *v;
    lvs_matrix_new_sparse(ctx, n, n, 0, &h0);
    lvs_matrix_new_sparse(ctx, n, n, 1, &v);
    for (size_t i = 0; i < n; i++) lvs_matrix_set(h0, i, i, 0.5 * (double)(i % 7), 0);
    const size_t off[] = {1, 3, 8};
    for (size_t i = 0; i < n; i++) {
      lvs_matrix_set(v, i, i, 0.02 * sin(1.1 * (double)i), 0);
      for (size_t o = 0; o < 3; o++) {
        size_t j = i + off[o];
        if (j >= n) continue;
        double re = 0.03 * sin(1.7 * (double)i + 2.3 * (double)j), im = 0.02 * cos(0.9 * (double)i - 1.3 * (double)j);
        lvs_matrix_set(v, i, j, re, im);
        lvs_matrix_set(v, j, i, re, -im);
      }
    }
    size_t lv[] = {0, 1, 2, 3, 4, 5};
    both_paths(h0, v, lv, 6, 4, "complex, 6-fold degenerate, order 4");
    size_t lv2[] = {6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17}; /* two degenerate levels together */
    both_paths(h0, v, lv2, 12, 5, "complex, two 6-fold levels, order 5");
    /* the group cuts a degenerate level: a clear message naming the others */
    lvs_effective *e = NULL;
    CHECK(lvs_effective_new(h0, v, lv, 3, 2, &e) == LVS_EINVAL && !e, "cut through a degenerate level");
    CHECK(strstr(lvs_errmsg(ctx), "levels 4, 5, 6 must come along with level 1") != NULL, "message: %s",
          lvs_errmsg(ctx));
    lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  /* 3. dense storage: a diagonal dense H0 with a degenerate pair in the
   * group, a dense complex V (every entry nonzero) */
  {
    size_t n = 12;
    const double e0[] = {2.0, 0.0, 1.0, 3.0, 1.0, 0.5, 4.0, 2.5, 3.5, 5.0, 0.25, 4.5};
    lvs_matrix *h0, *v;
    lvs_matrix_new(ctx, n, n, 0, &h0);
    lvs_matrix_new(ctx, n, n, 1, &v);
    for (size_t i = 0; i < n; i++) lvs_matrix_set(h0, i, i, e0[i], 0);
    for (size_t i = 0; i < n; i++)
      for (size_t j = i; j < n; j++) {
        double re = 0.04 * sin(1.7 * (double)i + 2.3 * (double)j) + 0.01;
        double im = i == j ? 0.0 : 0.03 * cos(0.9 * (double)i - 1.3 * (double)j);
        lvs_matrix_set(v, i, j, re, im);
        lvs_matrix_set(v, j, i, re, -im);
      }
    size_t lv[] = {3, 4}; /* E = 1, 1 (states 2 and 4) */
    both_paths(h0, v, lv, 2, 6, "dense complex, degenerate pair, order 6");
    size_t lv1[] = {0, 1, 2}; /* E = 0, 0.25, 0.5: spread out */
    both_paths(h0, v, lv1, 3, 5, "dense complex, spread-out group, order 5");
    lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  /* 4. padded oscillator ops: H0 = number, V = 0.01 x^3 (real, odd), one
   * level; and an H0 that is not diagonal takes the dense path unchanged */
  {
    lvs_basis *o = NULL;
    lvs_matrix *x = NULL, *x3 = NULL, *num = NULL, *v = NULL;
    CHECK(lvs_basis_oscillator(ctx, 60, LVS_DEFAULT_PAD, &o) == LVS_OK, "oscillator");
    lvs_basis_op(o, 0, "x", &x);
    lvs_basis_op(o, 0, "number", &num);
    CHECK(lvs_matrix_pow(x, 3, &x3) == LVS_OK, "x^3");
    double z[2] = {0.01, 0};
    lvs_matrix_scale(x3, z, &v);
    size_t lv[] = {2};
    both_paths(num, v, lv, 1, 6, "padded oscillator, level 3, order 6");
    size_t lv2[] = {0, 1};
    both_paths(num, v, lv2, 2, 6, "padded oscillator, levels 1-2, order 6");
    lvs_matrix_free(x), lvs_matrix_free(x3), lvs_matrix_free(num), lvs_matrix_free(v);
    lvs_basis_free(o);
  }

  /* 5. V that never leaves the group (a conserved quantity): Omega = 0,
   * H_eff = H0 + V on the group at first order and nothing after */
  {
    lvs_matrix *h0, *v;
    lvs_matrix_new_sparse(ctx, 5, 5, 0, &h0);
    lvs_matrix_new_sparse(ctx, 5, 5, 0, &v);
    for (size_t i = 0; i < 5; i++) lvs_matrix_set(h0, i, i, (double)i, 0);
    lvs_matrix_set(v, 0, 1, 0.3, 0);
    lvs_matrix_set(v, 1, 0, 0.3, 0);
    lvs_matrix_set(v, 3, 4, 0.2, 0);
    lvs_matrix_set(v, 4, 3, 0.2, 0);
    size_t lv[] = {0, 1};
    both_paths(h0, v, lv, 2, 4, "block-diagonal V");
    lvs_effective *e = NULL;
    CHECK(lvs_effective_new(h0, v, lv, 2, 4, &e) == LVS_OK, "block-diagonal V builds");
    lvs_matrix *t = NULL;
    if (e && lvs_effective_term(e, 2, &t) == LVS_OK) {
      double re, im, big = 0;
      for (size_t i = 0; i < 2; i++)
        for (size_t j = 0; j < 2; j++) lvs_matrix_get(t, i, j, &re, &im), big = fmax(big, fabs(re));
      CHECK(big == 0.0, "no second order when V keeps the group: %g", big);
    }
    lvs_matrix_free(t);
    lvs_effective_free(e);
    lvs_matrix_free(h0), lvs_matrix_free(v);
  }

  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failures\n", failures);
  return failures != 0;
}

/* test_core.c -- the C core without Lua: spin algebra, oscillator edge,
 * eigen, error paths. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double entry(const lvs_matrix *m, size_t i, size_t j, double *im) {
  double re, ii;
  lvs_matrix_get(m, i, j, &re, &ii);
  if (im) *im = ii;
  return re;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  CHECK(ctx != NULL, "context");

  /* [Sx, Sy] = i Sz for S = 1/2 .. 7/2
   * source: Sakurai & Napolitano, Modern Quantum Mechanics (2011), eq. 3.1.20 */
  for (int twoS = 1; twoS <= 7; twoS++) {
    lvs_basis *b;
    lvs_matrix *sx, *sy, *sz, *a, *bb, *c;
    CHECK(lvs_basis_spin(ctx, twoS, &b) == LVS_OK, "spin");
    lvs_basis_op(b, 0, "Sx", &sx);
    lvs_basis_op(b, 0, "Sy", &sy);
    lvs_basis_op(b, 0, "Sz", &sz);
    lvs_matrix_mul(sx, sy, &a);
    lvs_matrix_mul(sy, sx, &bb);
    double one[2] = {1, 0}, mone[2] = {-1, 0};
    lvs_matrix_add(one, a, mone, bb, &c);
    for (size_t i = 0; i < (size_t)twoS + 1; i++) {
      double im, re = entry(c, i, i, &im);
      double m = twoS / 2.0 - (double)i;
      CHECK(fabs(re) < 1e-13 && fabs(im - m) < 1e-13, "[Sx,Sy] = i Sz at S=%g m=%g", twoS / 2.0, m);
    }
    lvs_matrix_free(a); lvs_matrix_free(bb); lvs_matrix_free(c);
    lvs_matrix_free(sx); lvs_matrix_free(sy); lvs_matrix_free(sz);
    lvs_basis_free(b);
  }

  /* x^4 at the edge: <n|x^4|n> = (6n^2+6n+3)/4 (common practice, from
   * x = (a + a^+)/sqrt 2) */
  {
    lvs_basis *o;
    lvs_matrix *x, *x4;
    CHECK(lvs_basis_oscillator(ctx, 7, LVS_DEFAULT_PAD, &o) == LVS_OK, "oscillator");
    lvs_basis_op(o, 0, "x", &x);
    CHECK(lvs_matrix_pow(x, 4, &x4) == LVS_OK, "pow");
    for (size_t n = 0; n < 7; n++)
      CHECK(fabs(entry(x4, n, n, NULL) - (6.0 * n * n + 6.0 * n + 3) / 4) < 1e-12, "x4 diag n=%zu", n);
    CHECK(lvs_matrix_rows(x4) == 7, "visible size");
    /* eigen of the quartic oscillator vs NumPy value in ../shared/bench
     * (0.5591463271835195 at g = 0.1, N = 1000); converged by N = 120 */
    lvs_basis *big;
    lvs_matrix *xb, *xb4, *num, *h;
    lvs_basis_oscillator(ctx, 120, LVS_DEFAULT_PAD, &big);
    lvs_basis_op(big, 0, "x", &xb);
    lvs_basis_op(big, 0, "number", &num);
    lvs_matrix_pow(xb, 4, &xb4);
    double one[2] = {1, 0}, g[2] = {0.1, 0};
    lvs_matrix *t;
    lvs_matrix_add(one, num, g, xb4, &t);
    double half[2] = {0.5, 0};
    lvs_matrix_shift(t, half, &h);
    double w[2];
    CHECK(lvs_eigen(h, 2, 0, w, NULL) == LVS_OK, "eigen: %s", lvs_errmsg(ctx));
    CHECK(fabs(w[0] - 0.5591463271835195) < 1e-11, "quartic E0 = %.16g", w[0]);
    lvs_matrix_free(t); lvs_matrix_free(h); lvs_matrix_free(xb); lvs_matrix_free(xb4);
    lvs_matrix_free(num); lvs_basis_free(big);
    lvs_matrix_free(x); lvs_matrix_free(x4); lvs_basis_free(o);
  }

  /* error paths */
  {
    lvs_matrix *m = NULL, *n = NULL, *out = (lvs_matrix *)1;
    CHECK(lvs_matrix_new(ctx, 0, 3, 0, &m) == LVS_EINVAL && m == NULL, "zero size");
    CHECK(strstr(lvs_errmsg(ctx), "must be positive") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix_new(ctx, 2, 2, 0, &m);
    lvs_matrix_new(ctx, 3, 3, 0, &n);
    double one[2] = {1, 0};
    CHECK(lvs_matrix_add(one, m, one, n, &out) == LVS_EDIM && out == NULL, "add mismatch");
    CHECK(strcmp(lvs_errmsg(ctx), "dimension mismatch: 2x2 vs 3x3") == 0, "msg %s", lvs_errmsg(ctx));
    CHECK(lvs_matrix_set(m, 0, 0, NAN, 0) == LVS_EINVAL, "NaN refused");
    CHECK(lvs_matrix_set(m, 5, 0, 1, 0) == LVS_ERANGE, "range");
    lvs_matrix_set(m, 0, 1, 2.0, 0);
    double w[2];
    CHECK(lvs_eigen(m, 0, 0, w, NULL) == LVS_ENOTHERM, "non-Hermitian refused");
    lvs_ctx_set_dense_cap(ctx, 1000);
    lvs_matrix *big = NULL;
    CHECK(lvs_matrix_new(ctx, 100, 100, 0, &big) == LVS_ECAP && big == NULL, "cap");
    CHECK(lvs_matrix_new(ctx, (size_t)1 << 40, (size_t)1 << 40, 1, &big) == LVS_ECAP, "overflow");
    lvs_matrix_free(m);
    lvs_matrix_free(n);
    lvs_matrix_free(NULL);
    CHECK(lvs_basis_spin(ctx, 0, NULL == NULL ? &(lvs_basis *){0} : NULL) == LVS_EINVAL, "spin 0");
  }
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failures\n", failures);
  else printf("test_core: all checks passed\n");
  return failures ? 1 : 0;
}

/* test_matrix_sum.c -- lvs_matrix_sum (the one-pass sum) against closed forms
 * and the pairwise lvs_matrix_add, its error codes; lvs_matrix_hermitian_defect
 * on padded and complex sparse ops with known defects and positions. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double complex_at(const lvs_matrix *m, size_t i, size_t j, double *im) {
  double re, ii;
  lvs_matrix_get(m, i, j, &re, &ii);
  *im = ii;
  return re;
}

/* largest entry difference of the visible blocks */
static double maxdiff(const lvs_matrix *a, const lvs_matrix *b) {
  double worst = 0;
  for (size_t i = 0; i < lvs_matrix_rows(a); i++)
    for (size_t j = 0; j < lvs_matrix_cols(a); j++) {
      double ia, ib, ra = complex_at(a, i, j, &ia), rb = complex_at(b, i, j, &ib);
      double d = fmax(fabs(ra - rb), fabs(ia - ib));
      if (!(d <= worst)) worst = d;
    }
  return worst;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  CHECK(ctx != NULL, "context");
  const double one[2] = {1, 0};

  /* S1.S2 + 1/4 for two spins 1/2 in |uu>, |ud>, |du>, |dd>: diagonal
   * (1/2, 0, 0, 1/2), <ud|.|du> = 1/2 (common practice: S1.S2 =
   * (S(S+1) - 3/2)/2, so S1.S2 + 1/4 = SWAP/2); the exact zeros are dropped */
  {
    lvs_basis *s, *p;
    CHECK(lvs_basis_spin(ctx, 1, &s) == LVS_OK, "spin");
    const lvs_basis *sites[2] = {s, s};
    CHECK(lvs_basis_product(ctx, sites, 2, &p) == LVS_OK, "product");
    const char *names[3] = {"Sx", "Sy", "Sz"};
    lvs_matrix *t[4] = {NULL, NULL, NULL, NULL};
    for (int k = 0; k < 3; k++) {
      lvs_matrix *a, *b;
      lvs_basis_op(p, 1, names[k], &a);
      lvs_basis_op(p, 2, names[k], &b);
      CHECK(lvs_matrix_mul(a, b, &t[k]) == LVS_OK, "product %s", names[k]);
      lvs_matrix_free(a);
      lvs_matrix_free(b);
    }
    double coef[4][2] = {{1, 0}, {1, 0}, {1, 0}, {0.25, 0}};
    lvs_matrix *h;
    CHECK(lvs_matrix_sum(ctx, 4, (const double(*)[2])coef, (const lvs_matrix *const *)t, &h) == LVS_OK,
          "sum: %s", lvs_errmsg(ctx));
    double im, want[4][4] = {{0.5, 0, 0, 0}, {0, 0, 0.5, 0}, {0, 0.5, 0, 0}, {0, 0, 0, 0.5}};
    for (size_t i = 0; i < 4; i++)
      for (size_t j = 0; j < 4; j++) {
        double re = complex_at(h, i, j, &im);
        CHECK(fabs(re - want[i][j]) < 1e-15 && fabs(im) < 1e-15, "S.S + 1/4 at (%zu, %zu) = %g%+gi", i, j, re, im);
      }
    CHECK(lvs_matrix_is_complex(h) && lvs_matrix_is_sparse(h), "complex sparse, as Sy");
    CHECK(lvs_matrix_nnz(h) == 4, "zeros dropped: nnz %zu", lvs_matrix_nnz(h));
    /* pairwise, with a complex coefficient on the identity */
    double ci[4][2] = {{1, 0}, {-0.5, 0}, {2.385, 0}, {0.3, -0.7}};
    lvs_matrix *s1, *s2, *s3, *pw, *id;
    lvs_basis_op(p, 0, "identity", &id);
    lvs_matrix_add(ci[0], t[0], ci[1], t[1], &s1);
    lvs_matrix_add(one, s1, ci[2], t[2], &s2);
    lvs_matrix_add(one, s2, ci[3], id, &s3);
    pw = s3;
    lvs_matrix *one_pass;
    CHECK(lvs_matrix_sum(ctx, 4, (const double(*)[2])ci, (const lvs_matrix *const *)t, &one_pass) == LVS_OK, "sum");
    CHECK(maxdiff(one_pass, pw) < 1e-15, "one pass = pairwise: %g", maxdiff(one_pass, pw));
    /* errors */
    lvs_matrix *out = (lvs_matrix *)t;
    CHECK(lvs_matrix_sum(ctx, 0, NULL, (const lvs_matrix *const *)t, &out) == LVS_EINVAL && !out, "no terms");
    const lvs_matrix *ids[2] = {NULL, NULL};
    CHECK(lvs_matrix_sum(ctx, 2, NULL, ids, &out) == LVS_EINVAL && !out, "no op");
    CHECK(strstr(lvs_errmsg(ctx), "no term is an operator") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix *r23;
    lvs_matrix_new(ctx, 2, 3, 0, &r23);
    const lvs_matrix *bad[2] = {t[0], r23};
    CHECK(lvs_matrix_sum(ctx, 2, NULL, bad, &out) == LVS_EDIM && !out, "sizes");
    CHECK(strstr(lvs_errmsg(ctx), "term 1 is 4x4, term 2 is 2x3") != NULL, "message: %s", lvs_errmsg(ctx));
    const lvs_matrix *rect[2] = {r23, NULL};
    CHECK(lvs_matrix_sum(ctx, 2, NULL, rect, &out) == LVS_EDIM && !out, "identity of a 2x3");
    lvs_matrix_free(r23);
    lvs_matrix_free(id); lvs_matrix_free(s1); lvs_matrix_free(s2); lvs_matrix_free(s3);
    lvs_matrix_free(one_pass); lvs_matrix_free(h);
    for (int k = 0; k < 3; k++) lvs_matrix_free(t[k]);
    lvs_basis_free(p);
    lvs_basis_free(s);
  }

  /* padded terms, a plain one embedded, a dense one: equal to the pairwise
   * sum; <4|x^2|4> = 4 + 1/2 stays exact at the edge (common practice) */
  {
    lvs_basis *o, *o2;
    lvs_matrix *x, *x2, *num, *plain, *dense, *wrong;
    lvs_basis_oscillator(ctx, 5, LVS_DEFAULT_PAD, &o);
    lvs_basis_oscillator(ctx, 5, LVS_DEFAULT_PAD + 1, &o2);
    lvs_basis_op(o, 0, "x", &x);
    lvs_basis_op(o, 0, "number", &num);
    lvs_basis_op(o2, 0, "x", &wrong);
    lvs_matrix_mul(x, x, &x2);
    lvs_matrix_new_sparse(ctx, 5, 5, 0, &plain);
    lvs_matrix_set(plain, 0, 4, 0.625, 0);
    lvs_matrix_set(plain, 4, 0, 0.625, 0);
    lvs_matrix_set(plain, 2, 2, -1.75, 0);
    lvs_matrix_new(ctx, 5, 5, 0, &dense);
    lvs_matrix_set(dense, 1, 3, 0.2, 0);
    const lvs_matrix *t[4] = {plain, x2, num, NULL};
    double coef[4][2] = {{1, 0}, {0.5, 0}, {1, 0}, {0.5, 0}};
    lvs_matrix *s, *a1, *a2, *a3;
    CHECK(lvs_matrix_sum(ctx, 4, (const double(*)[2])coef, t, &s) == LVS_OK, "padded sum: %s", lvs_errmsg(ctx));
    lvs_matrix_add(one, plain, coef[1], x2, &a1);
    lvs_matrix_add(one, a1, one, num, &a2);
    lvs_matrix_shift(a2, coef[3], &a3);
    CHECK(lvs_matrix_rows(s) == 5 && maxdiff(s, a3) < 1e-15, "padded: one pass = pairwise: %g", maxdiff(s, a3));
    double im;
    CHECK(fabs(complex_at(s, 4, 4, &im) - (0.5 * 4.5 + 4 + 0.5)) < 1e-14, "edge entry");
    const lvs_matrix *td[3] = {x, dense, plain};
    lvs_matrix *sd, *b1, *b2;
    CHECK(lvs_matrix_sum(ctx, 3, NULL, td, &sd) == LVS_OK, "dense sum: %s", lvs_errmsg(ctx));
    lvs_matrix_add(one, x, one, dense, &b1);
    lvs_matrix_add(one, b1, one, plain, &b2);
    CHECK(!lvs_matrix_is_sparse(sd) && maxdiff(sd, b2) < 1e-15, "dense: one pass = pairwise");
    const lvs_matrix *tw[2] = {x, wrong};
    lvs_matrix *out;
    CHECK(lvs_matrix_sum(ctx, 2, NULL, tw, &out) == LVS_EDIM && !out, "different bases");
    CHECK(strstr(lvs_errmsg(ctx), "different bases") != NULL, "message: %s", lvs_errmsg(ctx));
    lvs_matrix_free(s); lvs_matrix_free(a1); lvs_matrix_free(a2); lvs_matrix_free(a3);
    lvs_matrix_free(sd); lvs_matrix_free(b1); lvs_matrix_free(b2);
    lvs_matrix_free(x); lvs_matrix_free(x2); lvs_matrix_free(num); lvs_matrix_free(plain);
    lvs_matrix_free(dense); lvs_matrix_free(wrong);
    lvs_basis_free(o); lvs_basis_free(o2);
  }

  /* Hermitian defect of a padded x (6 states) with two entries spoiled:
   * (1, 3) = 0.75 has no partner -> 0.75 there; (4, 3) = x_34 + 1 ->
   * defect 1 at (4, 3), the larger. x_34 = sqrt(4/2) (common practice,
   * x = (a + a^+)/sqrt 2). */
  {
    lvs_basis *o;
    lvs_matrix *x;
    size_t i, j;
    lvs_basis_oscillator(ctx, 6, LVS_DEFAULT_PAD, &o);
    lvs_basis_op(o, 0, "x", &x);
    CHECK(lvs_matrix_hermitian_defect(x, &i, &j) == 0.0, "x is Hermitian");
    lvs_matrix_set(x, 1, 3, 0.75, 0);
    double d = lvs_matrix_hermitian_defect(x, &i, &j);
    CHECK(fabs(d - 0.75) < 1e-15 && i == 1 && j == 3, "unpaired: %g at (%zu, %zu)", d, i, j);
    lvs_matrix_set(x, 4, 3, sqrt(2.0) + 1.0, 0);
    d = lvs_matrix_hermitian_defect(x, &i, &j);
    CHECK(fabs(d - 1.0) < 1e-14 && i == 4 && j == 3, "paired: %g at (%zu, %zu)", d, i, j);
    /* x N: defect x_{m,m+1} |(m+1) - m| = sqrt((m+1)/2), largest inside
     * the block at m = 4: sqrt(5/2) at (5, 4); the stored pair (5, 6)
     * (sqrt 3) lies beyond the visible block and must not count */
    lvs_matrix *x0, *num, *xn;
    lvs_basis_op(o, 0, "x", &x0);
    lvs_basis_op(o, 0, "number", &num);
    CHECK(lvs_matrix_mul(x0, num, &xn) == LVS_OK, "x N: %s", lvs_errmsg(ctx));
    d = lvs_matrix_hermitian_defect(xn, &i, &j);
    CHECK(fabs(d - sqrt(2.5)) < 1e-14 && i == 5 && j == 4, "x N: %g at (%zu, %zu)", d, i, j);
    lvs_matrix_free(x0); lvs_matrix_free(num); lvs_matrix_free(xn);
    lvs_matrix_free(x);
    lvs_basis_free(o);
  }

  /* complex sparse: Sy of spin 1 (Hermitian), then A_00 = 0.4i (defect
   * 2 * 0.4 = 0.8 at (0, 0)), then A_21 = conj(A_12) + 0.6 + 0.8i (defect
   * |0.6 + 0.8i| = 1 at (2, 1)); NaN counts as infinite */
  {
    lvs_basis *s;
    lvs_matrix *sy, *nan;
    size_t i, j;
    lvs_basis_spin(ctx, 2, &s);
    lvs_basis_op(s, 0, "Sy", &sy);
    CHECK(lvs_matrix_hermitian_defect(sy, &i, &j) == 0.0, "Sy is Hermitian");
    lvs_matrix_set(sy, 0, 0, 0.0, 0.4);
    double d = lvs_matrix_hermitian_defect(sy, &i, &j);
    CHECK(fabs(d - 0.8) < 1e-15 && i == 0 && j == 0, "diagonal: %g at (%zu, %zu)", d, i, j);
    double re, im;
    lvs_matrix_get(sy, 1, 2, &re, &im);
    lvs_matrix_set(sy, 2, 1, re + 0.6, -im + 0.8);
    d = lvs_matrix_hermitian_defect(sy, &i, &j);
    CHECK(fabs(d - 1.0) < 1e-15 && i == 2 && j == 1, "pair: %g at (%zu, %zu)", d, i, j);
    double z[2] = {NAN, 0};
    lvs_matrix_scale(sy, z, &nan);
    CHECK(isinf(lvs_matrix_hermitian_defect(nan, &i, &j)), "NaN is infinite");
    lvs_matrix_free(nan);
    lvs_matrix_free(sy);
    lvs_basis_free(s);
  }

  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "test_matrix_sum: %d failures\n", failures);
  else printf("test_matrix_sum: all checks passed\n");
  return failures != 0;
}

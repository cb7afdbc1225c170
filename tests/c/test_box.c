/* test_box.c -- box and rotor bases and Clebsch-Gordan in the core alone:
 * potentials through a C callback (success, failure, NaN, no convergence),
 * error paths. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double get(const lvs_matrix *m, size_t i, size_t j) {
  double re, im;
  lvs_matrix_get(m, i, j, &re, &im);
  return re;
}

/* V(x) = a x^2 (ud points at a); fails when a < 0, NaN when a == 0 */
static int quad_fn(void *ud, size_t n, const double *x, double *fx) {
  double a = *(double *)ud;
  if (a < 0) return 1;
  for (size_t i = 0; i < n; i++) fx[i] = a == 0 ? NAN : a * x[i] * x[i];
  return 0;
}
static int step_fn(void *ud, size_t n, const double *x, double *fx) {
  for (size_t i = 0; i < n; i++) fx[i] = x[i] < 0.3 ? 1.0 : 0.0;
  return 0;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  lvs_basis *b = NULL;
  lvs_matrix *v = NULL, *x2 = NULL;
  double err, a = 2.5;

  /* potential a x^2 equals a times the closed-form x^2
   * (source: Griffiths, Introduction to Quantum Mechanics, 2nd ed. 2005, problem 2.4, diagonal) */
  CHECK(lvs_basis_box(ctx, 10, 1.3, 0.7, 0, &b) == LVS_OK, "box: %s", lvs_errmsg(ctx));
  CHECK(lvs_box_potential(b, quad_fn, &a, NULL, &v, &err) == LVS_OK, "potential: %s", lvs_errmsg(ctx));
  CHECK(lvs_basis_op(b, 0, "x2", &x2) == LVS_OK, "x2");
  double worst = 0;
  for (size_t i = 0; i < 10; i++)
    for (size_t j = 0; j < 10; j++) worst = fmax(worst, fabs(get(v, i, j) - a * get(x2, i, j)));
  CHECK(worst < 1e-12, "a x^2 off by %g", worst);
  CHECK(fabs(get(x2, 2, 2) - 1.69 * (1.0 / 3 - 1.0 / (18 * M_PI * M_PI))) < 1e-14, "<3|x^2|3>");
  lvs_matrix_free(v);
  lvs_matrix_free(x2);

  /* callback failure and NaN: clean errors, *out NULL */
  a = -1;
  v = (lvs_matrix *)&a;
  CHECK(lvs_box_potential(b, quad_fn, &a, NULL, &v, &err) == LVS_EINVAL && v == NULL, "failure");
  a = 0;
  CHECK(lvs_box_potential(b, quad_fn, &a, NULL, &v, &err) == LVS_EINVAL && v == NULL, "NaN");
  CHECK(strstr(lvs_errmsg(ctx), "NaN at x =") != NULL, "NaN message: %s", lvs_errmsg(ctx));
  /* a jump without its break point does not converge; with it, it does */
  CHECK(lvs_box_potential(b, step_fn, NULL, NULL, &v, &err) == LVS_ENOCONV && v == NULL, "no convergence");
  double br = 0.3;
  lvs_box_quad q = {0, &br, 1};
  CHECK(lvs_box_potential(b, step_fn, NULL, &q, &v, &err) == LVS_OK, "step: %s", lvs_errmsg(ctx));
  /* <1|V|1> = 0.3/1.3 - sin(2 pi 0.3/1.3)/(2 pi) (elementary integration, common practice) */
  CHECK(fabs(get(v, 0, 0) - (0.3 / 1.3 - sin(2 * M_PI * 0.3 / 1.3) / (2 * M_PI))) < 1e-13, "step element");
  lvs_matrix_free(v);
  br = 2.0;
  CHECK(lvs_box_potential(b, step_fn, NULL, &q, &v, &err) == LVS_EINVAL, "break outside");
  lvs_basis_free(b);

  CHECK(lvs_basis_box(ctx, 0, 1, 1, 0, &b) == LVS_EINVAL && b == NULL, "N = 0");
  CHECK(lvs_basis_box(ctx, 3, -1, 1, 0, &b) == LVS_EINVAL, "negative width");
  CHECK(lvs_basis_box(ctx, 3, 1, NAN, 0, &b) == LVS_EINVAL, "NaN mass");

  /* rotor: cos theta from CG equals sqrt(((J+1)^2 - M^2)/((2J+1)(2J+3)))
   * (Condon & Shortley, The Theory of Atomic Spectra, 1935, sec. 9^3; from memory) */
  lvs_matrix *c = NULL;
  CHECK(lvs_basis_rotor(ctx, 4, 1, 0, &b) == LVS_OK, "rotor");
  CHECK(lvs_basis_dim(b) == 25, "rotor dim");
  CHECK(lvs_basis_op(b, 0, "cos", &c) == LVS_OK, "cos");
  /* |2 1> is state 4 + 1 = 5 (0-based), |3 1> is 9 + 2 = 11 */
  CHECK(fabs(get(c, 11, 5) - sqrt((9.0 - 1.0) / (5.0 * 7.0))) < 1e-15, "cos element");
  lvs_matrix_free(c);
  lvs_basis_free(b);
  CHECK(lvs_basis_rotor(ctx, -1, 1, 0, &b) == LVS_EINVAL, "Jmax < 0");
  CHECK(lvs_basis_rotor(ctx, 2, 0, 3, &b) == LVS_EINVAL, "|M| > Jmax");

  /* CG: <1/2 1/2 1/2 -1/2|0 0> = 1/sqrt 2 (any table, e.g. Particle Data Group; common practice) */
  double cg;
  CHECK(lvs_clebsch_gordan(ctx, 1, 1, 1, -1, 0, 0, &cg) == LVS_OK && fabs(cg - sqrt(0.5)) < 1e-15, "CG");
  CHECK(lvs_clebsch_gordan(ctx, 2, 3, 2, 0, 2, 3, &cg) == LVS_EINVAL, "|m| > j");
  CHECK(lvs_clebsch_gordan(ctx, 2, 1, 1, 1, 3, 2, &cg) == LVS_EINVAL, "j + m not integer");
  CHECK(lvs_clebsch_gordan(ctx, -2, 0, 2, 0, 2, 0, &cg) == LVS_EINVAL, "negative j");
  CHECK(lvs_clebsch_gordan(ctx, 4000, 0, 2, 0, 4000, 0, &cg) == LVS_ERANGE, "j too large");

  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  return failures != 0;
}

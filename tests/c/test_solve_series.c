/* test_solve_series.c -- radial grids, block assembly and the linear-solve
 * (Dalgarno-Lewis) series in the C core, without Lua. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

/* hydrogen 1s polarizability on an n-point grid: -2 E(2) for V = z */
static double alpha(lvs_ctx *ctx, size_t n) {
  lvs_matrix *h0, *h1, *r, *z, *H, *V;
  lvs_radial(ctx, n, 60.0, 0, 1.0, &h0, &r);
  lvs_radial(ctx, n, 60.0, 1, 1.0, &h1, NULL);
  double c[2] = {1.0 / sqrt(3.0), 0.0}; /* <Y10|cos|Y00> = 1/sqrt(3) */
  lvs_matrix_scale(r, c, &z);
  const lvs_matrix *g[4] = {h0, NULL, NULL, h1}, *gv[4] = {NULL, z, z, NULL};
  lvs_matrix_blocks(ctx, 2, 2, g, &H);
  lvs_matrix_blocks(ctx, 2, 2, gv, &V);
  lvs_dlseries *s = NULL;
  int st = lvs_dlseries_new(H, V, 2, NULL, &s);
  double e2 = NAN;
  if (!st) lvs_dlseries_energy(s, 2, &e2);
  CHECK(!st, "dlseries: %s", lvs_errmsg(ctx));
  CHECK(!st && strcmp(lvs_dlseries_solver(s), "twisted") == 0, "ground state uses the twisted L D L^T path");
  lvs_dlseries_free(s);
  lvs_matrix_free(h0), lvs_matrix_free(h1), lvs_matrix_free(r), lvs_matrix_free(z);
  lvs_matrix_free(H), lvs_matrix_free(V);
  return -2.0 * e2;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  /* the radial operator is tridiagonal and stays sparse */
  lvs_matrix *h, *r;
  CHECK(lvs_radial(ctx, 500, 40.0, 2, 1.0, &h, &r) == LVS_OK, "radial");
  size_t b = 9;
  lvs_matrix_bandwidth(h, &b);
  CHECK(b == 1 && lvs_matrix_is_sparse(h) && lvs_matrix_nnz(h) == 3 * 500 - 2, "tridiagonal, sparse");
  double re, im;
  lvs_matrix_get(r, 9, 9, &re, &im);
  CHECK(fabs(re - 10 * 40.0 / 501) < 1e-14, "grid r_i = i h");
  lvs_matrix_free(h);
  lvs_matrix_free(r);
  CHECK(lvs_radial(ctx, 1, 40.0, 0, 1.0, &h, &r) == LVS_EINVAL && h == NULL, "n = 1 refused");
  CHECK(lvs_radial(ctx, 10, -1.0, 0, 1.0, &h, &r) == LVS_EINVAL, "rmax < 0 refused");
  /* alpha -> 9/2 (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955)) with
   * the O(h^2) error of three-point differences (common practice) */
  double a1 = alpha(ctx, 1500), a2 = alpha(ctx, 3000);
  CHECK(fabs(a2 - 4.5) < 2e-3, "alpha(3000) = %.8f", a2);
  double ratio = (a1 - 4.5) / (a2 - 4.5);
  CHECK(ratio > 3.6 && ratio < 4.4, "h^2 convergence ratio %.3f", ratio);
  /* errors: V of the wrong size, order out of range */
  lvs_matrix *A, *B;
  lvs_radial(ctx, 10, 10.0, 0, 1.0, &A, NULL);
  lvs_radial(ctx, 11, 10.0, 0, 1.0, &B, NULL);
  lvs_dlseries *s = (lvs_dlseries *)1;
  CHECK(lvs_dlseries_new(A, B, 2, NULL, &s) == LVS_EDIM && s == NULL, "size mismatch");
  CHECK(lvs_dlseries_new(A, A, 0, NULL, &s) == LVS_ERANGE, "order 0");
  const lvs_matrix *g[4] = {A, NULL, NULL, B};
  lvs_matrix *C;
  CHECK(lvs_matrix_blocks(ctx, 2, 2, g, &C) == LVS_OK && lvs_matrix_rows(C) == 21, "blocks");
  const lvs_matrix *bad[4] = {A, B, NULL, NULL};
  lvs_matrix *D = NULL;
  CHECK(lvs_matrix_blocks(ctx, 2, 2, bad, &D) == LVS_EDIM && D == NULL, "ragged blocks: %s",
        lvs_errmsg(ctx));
  lvs_matrix_free(A), lvs_matrix_free(B), lvs_matrix_free(C);
  lvs_dlseries_free(NULL);
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  return failures ? 1 : 0;
}

/* test_eigen_sectors.c -- lvs_eigen_sectors and the automatic sector path of
 * lvs_eigen, in the C core without Lua. */
#include <math.h>
#include <stdio.h>
#include "levelshift.h"

#include "check.h"

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  /* invented 4x4 with sectors {1, 3} and {2, 4} (0-based {0, 2}, {1, 3}) */
  size_t ii[] = {0, 0, 2, 2, 1, 1, 3, 3}, jj[] = {0, 2, 0, 2, 1, 3, 1, 3};
  double re[] = {1.3, 0.4, 0.4, 2.1, -0.7, 0.25, 0.25, 0.9};
  lvs_matrix *H = NULL, *U = NULL;
  lvs_matrix_from_triplets(ctx, 4, 4, 8, ii, jj, re, NULL, &H);
  double w[4];
  CHECK(lvs_eigen(H, 0, 1, w, &U) == LVS_OK, "auto sectors: %s", lvs_errmsg(ctx));
  /* source: closed form (a+d)/2 -/+ sqrt(((a-d)/2)^2 + b^2) (common practice) */
  double lo2 = 0.1 - sqrt(0.8 * 0.8 + 0.25 * 0.25), lo1 = 1.7 - sqrt(0.4 * 0.4 + 0.4 * 0.4);
  CHECK(fabs(w[0] - lo2) < 1e-14 && fabs(w[1] - (0.2 - lo2)) < 1e-14 && fabs(w[2] - lo1) < 1e-14,
        "w = %g %g %g", w[0], w[1], w[2]);
  double r, im;
  lvs_matrix_get(U, 0, 0, &r, &im);
  CHECK(r == 0.0, "ground state has no weight on state 1");
  lvs_matrix_free(U);
  size_t good[] = {0, 1, 0, 1}, bad[] = {0, 0, 1, 1};
  double w2[2];
  CHECK(lvs_eigen_sectors(H, good, 2, 0, w2, NULL) == LVS_OK && fabs(w2[0] - lo2) < 1e-14, "given sectors");
  CHECK(lvs_eigen_sectors(H, bad, 2, 0, w2, NULL) == LVS_EINVAL, "coupling entry refused");
  lvs_matrix_free(H);
  /* diagonal op: sorted, ties in state order */
  size_t di[] = {0, 1, 2}; double dv[] = {2.5, -1.25, -1.25};
  lvs_matrix *D = NULL;
  lvs_matrix_from_triplets(ctx, 3, 3, 3, di, di, dv, NULL, &D);
  CHECK(lvs_eigen(D, 0, 1, w, &U) == LVS_OK && w[0] == -1.25 && w[2] == 2.5, "diagonal");
  lvs_matrix_get(U, 1, 0, &r, &im);
  CHECK(r == 1.0, "first of the tie is state 2");
  lvs_matrix_free(U);
  lvs_matrix_free(D);
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  return failures ? 1 : 0;
}

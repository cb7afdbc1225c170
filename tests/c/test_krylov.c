/* test_krylov.c -- lvs_eigen_ex's Krylov path (ARPACK, UMFPACK shift-invert)
 * on the second-difference matrix tridiag(-1, 2, -1), whose eigenvalues are
 * 2 - 2 cos(k pi/(n+1)), k = 1..n (G. Strang, "Introduction to Applied
 * Mathematics", Wellesley-Cambridge 1986, section 1.5), and its error codes. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "check.h"
#include "levelshift.h"

static lvs_matrix *second_difference(lvs_ctx *ctx, size_t n, double diag_im) {
  size_t nnz = 3 * n - 2, q = 0;
  size_t *ii = malloc(nnz * sizeof(size_t)), *jj = malloc(nnz * sizeof(size_t));
  double *re = malloc(nnz * sizeof(double)), *im = malloc(nnz * sizeof(double));
  for (size_t i = 0; i < n; i++) {
    ii[q] = jj[q] = i, re[q] = 2.0, im[q++] = 0.0;
    if (i + 1 < n) {
      ii[q] = i, jj[q] = i + 1, re[q] = -1.0, im[q++] = diag_im; /* -1 + i t above, -1 - i t below */
      ii[q] = i + 1, jj[q] = i, re[q] = -1.0, im[q++] = -diag_im;
    }
  }
  lvs_matrix *h = NULL;
  lvs_matrix_from_triplets(ctx, n, n, nnz, ii, jj, re, diag_im != 0.0 ? im : NULL, &h);
  free(ii), free(jj), free(re), free(im);
  return h;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  size_t n = 1800;
  lvs_matrix *h = second_difference(ctx, n, 0.0), *v = NULL;
  double w[6];
  lvs_eigen_opts o = {0};
  o.method = LVS_EIGEN_KRYLOV;
  int st = lvs_eigen_ex(h, NULL, 3, 1, &o, w, &v);
  CHECK(st == LVS_OK, "krylov lowest: %s", lvs_errmsg(ctx));
  for (int k = 0; k < 3 && !st; k++) {
    double want = 2.0 - 2.0 * cos((k + 1) * M_PI / (double)(n + 1));
    CHECK(fabs(w[k] - want) < 1e-12, "level %d: %.17g vs %.17g", k + 1, w[k], want);
  }
  CHECK(v && lvs_matrix_rows(v) == n && lvs_matrix_cols(v) == 3, "vectors n x 3");
  lvs_matrix_free(v);
  v = NULL;
  /* shift-invert: the 4 levels nearest 1.0 (k near (n+1)/3) */
  o.has_near = 1;
  o.near = 1.0 + 1e-4;
  st = lvs_eigen_ex(h, NULL, 4, 0, &o, w, NULL);
  CHECK(st == LVS_OK, "krylov near: %s", lvs_errmsg(ctx));
  double all[4];
  {
    size_t kc = (size_t)floor((n + 1) / 3.0); /* 2 - 2cos(k pi/(n+1)) = 1 at k = (n+1)/3 */
    double cand[8];
    for (int d = 0; d < 8; d++) cand[d] = 2.0 - 2.0 * cos((double)(kc - 3 + d) * M_PI / (double)(n + 1));
    for (int a = 0; a < 4; a++) { /* pick the 4 nearest of the 8 neighbours, ascending */
      int best = -1;
      for (int d = 0; d < 8; d++)
        if (cand[d] == cand[d] && (best < 0 || fabs(cand[d] - o.near) < fabs(cand[best] - o.near))) best = d;
      all[a] = cand[best];
      cand[best] = NAN;
    }
    for (int a = 1; a < 4; a++)
      for (int b = a; b > 0 && all[b - 1] > all[b]; b--) {
        double t = all[b];
        all[b] = all[b - 1], all[b - 1] = t;
      }
  }
  for (int k = 0; k < 4 && !st; k++) CHECK(fabs(w[k] - all[k]) < 1e-11, "near level %d: %.17g vs %.17g", k, w[k], all[k]);
  /* complex Hermitian: -1 +- i t off the diagonal is unitarily equivalent to
   * modulus sqrt(1 + t^2) hopping (a gauge transformation): eigenvalues
   * 2 - 2 sqrt(1 + t^2) cos(k pi/(n+1)) (common practice) */
  lvs_matrix *hc = second_difference(ctx, 900, 0.37);
  o.has_near = 0;
  st = lvs_eigen_ex(hc, NULL, 2, 0, &o, w, NULL);
  CHECK(st == LVS_OK, "complex krylov: %s", lvs_errmsg(ctx));
  for (int k = 0; k < 2 && !st; k++) {
    double want = 2.0 - 2.0 * sqrt(1 + 0.37 * 0.37) * cos((k + 1) * M_PI / 901.0);
    CHECK(fabs(w[k] - want) < 1e-11, "complex level %d: %.17g vs %.17g", k + 1, w[k], want);
  }
  /* errors */
  o.has_near = 1;
  o.near = 9.0; /* Gershgorin range [0, 4] */
  st = lvs_eigen_ex(h, NULL, 2, 0, &o, w, NULL);
  CHECK(st == LVS_EINVAL && strstr(lvs_errmsg(ctx), "outside the spectrum's range"), "near outside: %d %s", st,
        lvs_errmsg(ctx));
  o.has_near = 0;
  o.maxiter = 1;
  o.tol = 1e-15;
  st = lvs_eigen_ex(h, NULL, 4, 0, &o, w, NULL);
  CHECK(st == LVS_ENOCONV && strstr(lvs_errmsg(ctx), "did not converge"), "no convergence: %d %s", st,
        lvs_errmsg(ctx));
  o.maxiter = 0;
  o.tol = -1;
  CHECK(lvs_eigen_ex(h, NULL, 4, 0, &o, w, NULL) == LVS_EINVAL, "negative tol");
  lvs_matrix_free(h);
  lvs_matrix_free(hc);
  lvs_ctx_free(ctx);
  return failures != 0;
}

/* opfun.c -- functions of a Hermitian operator: f(A) = U f(Lambda) U^H
 * from A's eigenvectors (dsyevd/zheevd), the spectral theorem.
 *
 * For a padded op (oscillator operators keep N + pad levels, see matrix.c)
 * f is applied on the whole stored space, so f(x) inside the N kept levels
 * equals f of the larger matrix: exp(-a x) on 40 + 60 levels matches the
 * exact matrix elements of the 40 lowest states far better than exp of the
 * 40 x 40 block (the edge states of a truncated x carry the error). The
 * result keeps the padding but with no exact padded levels left (slack 0):
 * it can be added to other ops and solved, and a product with it, which
 * would reach past the edge, is refused. */
#include <cblas.h>
#include <complex.h>
#include <math.h>
#include <string.h>
#include "internal.h"

/* a plain dense copy of a's stored matrix (every stored level) */
static int stored_dense(const lvs_matrix *a, lvs_matrix **out) {
  size_t n = a->rows;
  int st = lvsi_mat_alloc(a->ctx, n, n, a->cplx, 0, 0, out);
  if (st) return st;
  lvs_matrix *d = *out;
  size_t w = a->cplx ? 2 : 1;
  if (a->sparse) {
    for (size_t j = 0; j < n; j++)
      for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
        size_t at = (size_t)a->ri[k] + j * n;
        d->a[w * at] = a->a[w * k];
        if (w == 2) d->a[2 * at + 1] = a->a[2 * k + 1];
      }
  } else {
    memcpy(d->a, a->a, n * n * w * sizeof(double));
  }
  return LVS_OK;
}

int lvs_matrix_function(const lvs_matrix *a, lvs_real_fn f, void *ud, lvs_matrix **out) {
  lvs_ctx *ctx = a->ctx;
  *out = NULL;
  if (a->rows != a->cols) return lvsi_fail(ctx, LVS_EDIM, "a function of an op needs a square op");
  size_t n = a->rows;
  int st = lvsi_dense_ok(ctx, n, n, a->cplx ? 16 : 8, "a function of an op");
  if (st) return st;
  if ((st = lvsi_check_hermitian(a, LVS_DEFAULT_HERM_TOL, "matrix"))) return st;
  lvs_matrix *d = NULL, *u = NULL, *r = NULL;
  double *w = lvsi_malloc(ctx, (n ? n : 1) * sizeof *w), *fw = lvsi_malloc(ctx, (n ? n : 1) * sizeof *fw);
  double *t = NULL;
  if (!w || !fw) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory for a function of an op");
    goto done;
  }
  if ((st = stored_dense(a, &d))) goto done;
  if ((st = lvs_eigen_dense(d, 0, 1, w, &u))) goto done;
  if (f(ud, n, w, fw)) {
    st = lvsi_fail(ctx, LVS_EINVAL, "the function failed");
    goto done;
  }
  for (size_t k = 0; k < n; k++)
    if (!isfinite(fw[k])) {
      st = lvsi_fail(ctx, LVS_EINVAL, "the function is not finite at the eigenvalue %.17g", w[k]);
      goto done;
    }
  if ((st = lvsi_mat_alloc(ctx, n, n, a->cplx, 0, 0, &r))) goto done;
  size_t el = a->cplx ? 2 : 1;
  if (!(t = lvsi_malloc(ctx, (n ? n * n : 1) * el * sizeof *t))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory for a function of an op");
    goto done;
  }
  /* r = (U diag(f)) U^H */
  if ((st = lvsi_fence_cost(ctx, (a->cplx ? 8.0 : 2.0) * (double)n * (double)n * (double)n, "a function of an op")))
    goto done;
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n * el; i++) t[i + j * n * el] = u->a[i + j * n * el] * fw[j];
  if (a->cplx) {
    double complex one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasConjTrans, (int)n, (int)n, (int)n, &one, t, (int)n, u->a,
                (int)n, &zero, r->a, (int)n);
  } else {
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, (int)n, (int)n, (int)n, 1.0, t, (int)n, u->a, (int)n, 0.0,
                r->a, (int)n);
  }
  if (a->vis) {
    if ((st = lvsi_set_vis(r, a->n, a->vis))) goto done;
    r->slack = 0;
  }
  r->band = (long)n;
done:
  lvsi_free(ctx, w);
  lvsi_free(ctx, fw);
  lvsi_free(ctx, t);
  lvs_matrix_free(d);
  lvs_matrix_free(u);
  if (st) {
    lvs_matrix_free(r);
    return st;
  }
  *out = r;
  return LVS_OK;
}

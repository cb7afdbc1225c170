/* eigen.c -- exact spectra of Hermitian operators through LAPACKE.
 *
 * All pairs: dsyevd/zheevd (divide and conquer; Cuppen, Numer. Math. 36, 177
 * (1981)). A lowest subset: dsyevr/zheevr with RANGE='I' (MRRR; Dhillon &
 * Parlett, Lin. Alg. Appl. 387, 1 (2004)). Eigenvalues ascending; columns of
 * the vector matrix normalized, phase as LAPACK returns it. The input is not
 * overwritten (a dense copy of the visible block is factored).
 */
#include <lapacke.h>
#include <math.h>
#include <string.h>
#include "internal.h"

/* Hermiticity and finiteness check shared by solvers: tolerance relative to
 * the largest entry. */
int lvsi_check_hermitian(const lvs_matrix *h, double tol, const char *what) {
  lvs_ctx *ctx = h->ctx;
  size_t n = lvs_matrix_rows(h);
  if (n != lvs_matrix_cols(h))
    return lvsi_fail(ctx, LVS_EDIM, "%s must be square, got %zux%zu", what, n, lvs_matrix_cols(h));
  double scale = 0.0;
  size_t cnt = (h->sparse ? h->nnz : h->rows * h->cols) * (h->cplx ? 2 : 1);
  for (size_t k = 0; k < cnt; k++) {
    if (!isfinite(h->a[k])) return lvsi_fail(ctx, LVS_EINVAL, "%s has a NaN or infinite entry", what);
    if (fabs(h->a[k]) > scale) scale = fabs(h->a[k]);
  }
  size_t i, j;
  double d = lvs_matrix_hermitian_defect(h, &i, &j);
  if (d > tol * (scale > 0 ? scale : 1.0))
    return lvsi_fail(ctx, LVS_ENOTHERM,
                     "%s is not Hermitian: |H(%zu,%zu) - conj(H(%zu,%zu))| = %.3g (largest entry %.3g)",
                     what, i + 1, j + 1, j + 1, i + 1, d, scale);
  return LVS_OK;
}

int lvs_eigen(const lvs_matrix *h, size_t count, int want_vectors, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = h->ctx;
  if (vecs) *vecs = NULL;
  int st = lvsi_check_hermitian(h, LVS_DEFAULT_HERM_TOL, "matrix");
  if (st) return st;
  size_t n = lvs_matrix_rows(h);
  if (count == 0 || count > n) count = n;
  if (n > 2147483647u) return lvsi_fail(ctx, LVS_ECAP, "matrix of %zu states is too large for LAPACK", n);
  /* cap: working copy plus vectors */
  if ((st = lvsi_dense_ok(ctx, n, n, h->cplx ? 16 : 8, "eigen (working copy)"))) return st;
  if (want_vectors && (st = lvsi_dense_ok(ctx, n, count, h->cplx ? 16 : 8, "eigen (vectors)"))) return st;
  lvs_matrix *a = NULL, *z = NULL;
  if ((st = lvs_matrix_visible(h, 1, &a))) return st;
  lapack_int N = (lapack_int)n, info, found = 0;
  char jobz = want_vectors ? 'V' : 'N';
  if (count == n) {
    info = h->cplx ? LAPACKE_zheevd(LAPACK_COL_MAJOR, jobz, 'L', N, (lapack_complex_double *)a->a, N, w)
                   : LAPACKE_dsyevd(LAPACK_COL_MAJOR, jobz, 'L', N, a->a, N, w);
    if (info == 0 && want_vectors) { /* a now holds the vectors */
      z = a;
      a = NULL;
    }
  } else {
    if ((st = lvsi_mat_alloc(ctx, n, want_vectors ? count : 1, h->cplx, 0, 0, &z))) goto done;
    lapack_int *isuppz = lvsi_malloc(ctx, 2 * n * sizeof(lapack_int));
    double *wfull = lvsi_malloc(ctx, n * sizeof(double));
    if (!isuppz || !wfull) {
      lvsi_free(ctx, isuppz);
      lvsi_free(ctx, wfull);
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
      goto done;
    }
    lapack_int ldz = N;
    info = h->cplx ? LAPACKE_zheevr(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, (lapack_complex_double *)a->a, N,
                                    0, 0, 1, (lapack_int)count, 0.0, &found, wfull,
                                    (lapack_complex_double *)z->a, ldz, isuppz)
                   : LAPACKE_dsyevr(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, a->a, N, 0, 0, 1,
                                    (lapack_int)count, 0.0, &found, wfull, z->a, ldz, isuppz);
    memcpy(w, wfull, count * sizeof(double));
    lvsi_free(ctx, isuppz);
    lvsi_free(ctx, wfull);
  }
  if (info < 0) {
    st = lvsi_fail(ctx, LVS_EINVAL, "LAPACK eigen solver: argument %d invalid", (int)-info);
    goto done;
  }
  if (info > 0) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "LAPACK eigen solver failed to converge (info %d)", (int)info);
    goto done;
  }
  if (want_vectors && vecs) {
    *vecs = z;
    z = NULL;
  }
done:
  lvs_matrix_free(a);
  lvs_matrix_free(z);
  return st;
}

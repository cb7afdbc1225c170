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
#include <stdlib.h>
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

/* ---- structure: symmetry sectors and tridiagonal matrices --------------- */

typedef struct {
  double w;
  size_t blk, col;
} evrec;

static int cmp_evrec(const void *x, const void *y) {
  const evrec *a = x, *b = y;
  if (a->w != b->w) return a->w < b->w ? -1 : 1;
  if (a->blk != b->blk) return a->blk < b->blk ? -1 : 1;
  return a->col < b->col ? -1 : a->col > b->col;
}

static double complex entry_at(const lvs_matrix *m, size_t k) {
  return m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
}

/* Spectrum of a plain Hermitian matrix block by block: comp[i] (0..nb-1)
 * gives the block of state i. Each block is diagonalized densely (its
 * lowest min(count, size) pairs), the values are merged in ascending order
 * (ties by block, then by position: deterministic) and the vectors are
 * scattered into an n x count dense matrix. An entry coupling two blocks is
 * an error (LVS_EINVAL, naming it). source: METHODS.md 4 (symmetry sectors). */
static int eigen_blocks(const lvs_matrix *a, const size_t *comp, size_t nb, size_t count,
                        int want, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = a->ctx;
  size_t n = a->rows;
  int st = LVS_OK;
  size_t *size = lvsi_calloc(ctx, nb, sizeof(size_t));
  size_t *loc = lvsi_malloc(ctx, n * sizeof(size_t));
  lvs_matrix **blk = lvsi_calloc(ctx, nb, sizeof(lvs_matrix *));
  lvs_matrix **bv = lvsi_calloc(ctx, nb, sizeof(lvs_matrix *));
  double **bw = lvsi_calloc(ctx, nb, sizeof(double *));
  evrec *rec = NULL;
  lvs_matrix *z = NULL;
  if (!size || !loc || !blk || !bv || !bw) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
    goto done;
  }
  for (size_t i = 0; i < n; i++) loc[i] = size[comp[i]]++;
  int diag = nb == n; /* every block is one state: no LAPACK calls */
  if (diag) {
    if (!(rec = lvsi_malloc(ctx, n * sizeof(evrec)))) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
      goto done;
    }
    for (size_t i = 0; i < n; i++) rec[comp[i]] = (evrec){0.0, comp[i], 0};
  } else {
    for (size_t b = 0; b < nb; b++)
      if ((st = lvsi_mat_alloc(ctx, size[b], size[b], a->cplx, 0, 0, &blk[b]))) goto done;
  }
  /* scatter the entries into their blocks; an entry between two is an error */
  for (size_t j = 0; j < n; j++) {
    size_t k0 = a->sparse ? a->cp[j] : 0, k1 = a->sparse ? a->cp[j + 1] : n;
    for (size_t k = k0; k < k1; k++) {
      size_t i = a->sparse ? a->ri[k] : k;
      double complex v = entry_at(a, a->sparse ? k : i + j * n);
      if (v == 0.0) continue;
      if (comp[i] != comp[j]) {
        st = lvsi_fail(ctx, LVS_EINVAL, "entry (%zu, %zu) = %.3g couples two blocks", i + 1, j + 1,
                       cabs(v));
        goto done;
      }
      if (diag) {
        rec[comp[i]].w = creal(v);
        continue;
      }
      lvs_matrix *m = blk[comp[j]];
      size_t p = loc[i] + loc[j] * m->rows;
      if (m->cplx) {
        m->a[2 * p] = creal(v);
        m->a[2 * p + 1] = cimag(v);
      } else {
        m->a[p] = creal(v);
      }
    }
  }
  if (diag) {
    qsort(rec, n, sizeof(evrec), cmp_evrec);
    for (size_t k = 0; k < count; k++) w[k] = rec[k].w;
    if (want) {
      if ((st = lvsi_mat_alloc(ctx, n, count, a->cplx, 0, 0, &z))) goto done;
      for (size_t i = 0; i < n; i++) loc[comp[i]] = i; /* block -> state */
      for (size_t k = 0; k < count; k++) z->a[(a->cplx ? 2 : 1) * (loc[rec[k].blk] + k * n)] = 1.0;
      *vecs = z;
      z = NULL;
    }
    goto done;
  }
  size_t total = 0;
  for (size_t b = 0; b < nb; b++) {
    size_t kb = count < size[b] ? count : size[b];
    if (!(bw[b] = lvsi_malloc(ctx, kb * sizeof(double)))) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
      goto done;
    }
    if ((st = lvs_eigen(blk[b], kb, want, bw[b], want ? &bv[b] : NULL))) goto done;
    total += kb;
    lvs_matrix_free(blk[b]);
    blk[b] = NULL;
  }
  if (!(rec = lvsi_malloc(ctx, total * sizeof(evrec)))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
    goto done;
  }
  size_t r = 0;
  for (size_t b = 0; b < nb; b++) {
    size_t kb = count < size[b] ? count : size[b];
    for (size_t c = 0; c < kb; c++) rec[r++] = (evrec){bw[b][c], b, c};
  }
  qsort(rec, total, sizeof(evrec), cmp_evrec);
  for (size_t k = 0; k < count; k++) w[k] = rec[k].w;
  if (want) {
    if ((st = lvsi_mat_alloc(ctx, n, count, a->cplx, 0, 0, &z))) goto done;
    /* members of each block in ascending order: walk states once per column */
    for (size_t k = 0; k < count; k++) {
      const lvs_matrix *v = bv[rec[k].blk];
      size_t m = v->rows, c = rec[k].col;
      for (size_t i = 0; i < n; i++) {
        if (comp[i] != rec[k].blk) continue;
        size_t src = loc[i] + c * m, dst = i + k * n;
        if (a->cplx) {
          z->a[2 * dst] = v->a[2 * src];
          z->a[2 * dst + 1] = v->a[2 * src + 1];
        } else {
          z->a[dst] = v->a[src];
        }
      }
    }
    *vecs = z;
    z = NULL;
  }
done:
  if (blk)
    for (size_t b = 0; b < nb; b++) lvs_matrix_free(blk[b]);
  if (bv)
    for (size_t b = 0; b < nb; b++) lvs_matrix_free(bv[b]);
  if (bw)
    for (size_t b = 0; b < nb; b++) lvsi_free(ctx, bw[b]);
  lvsi_free(ctx, blk);
  lvsi_free(ctx, bv);
  lvsi_free(ctx, bw);
  lvsi_free(ctx, size);
  lvsi_free(ctx, loc);
  lvsi_free(ctx, rec);
  lvs_matrix_free(z);
  return st;
}

/* Real symmetric tridiagonal (sparse, bandwidth 1): dstevr (MRRR for all
 * pairs, bisection + inverse iteration for a subset), O(n count) memory. */
static int eigen_tridiag(const lvs_matrix *a, size_t count, int want, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = a->ctx;
  size_t n = a->rows;
  int st;
  if (want && (st = lvsi_dense_ok(ctx, n, count, 8, "eigenvectors"))) return st;
  double *d = lvsi_calloc(ctx, n, sizeof(double)), *e = lvsi_calloc(ctx, n, sizeof(double));
  double *wf = lvsi_malloc(ctx, n * sizeof(double));
  lapack_int *sup = lvsi_malloc(ctx, 2 * n * sizeof(lapack_int));
  lvs_matrix *z = NULL;
  if (!d || !e || !wf || !sup) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (tridiagonal)");
    goto done;
  }
  for (size_t j = 0; j < n; j++)
    for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
      if (a->ri[k] == j) d[j] = a->a[k];
      else if (a->ri[k] == j + 1) e[j] = a->a[k];
    }
  if (want && (st = lvsi_mat_alloc(ctx, n, count, 0, 0, 0, &z))) goto done;
  lapack_int found = 0;
  double dummy = 0.0;
  lapack_int info = LAPACKE_dstevr(LAPACK_COL_MAJOR, want ? 'V' : 'N', count == n ? 'A' : 'I',
                                   (lapack_int)n, d, e, 0.0, 0.0, 1, (lapack_int)count, 0.0, &found,
                                   wf, want ? z->a : &dummy, want ? (lapack_int)n : 1, sup);
  if (info < 0) {
    st = lvsi_fail(ctx, LVS_EINVAL, "dstevr: argument %d invalid", (int)-info);
    goto done;
  }
  if (info > 0 || (size_t)found < count) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "dstevr failed (info %d)", (int)info);
    goto done;
  }
  memcpy(w, wf, count * sizeof(double));
  if (want) {
    *vecs = z;
    z = NULL;
  }
  st = LVS_OK;
done:
  lvsi_free(ctx, d);
  lvsi_free(ctx, e);
  lvsi_free(ctx, wf);
  lvsi_free(ctx, sup);
  lvs_matrix_free(z);
  return st;
}

int lvs_eigen_sectors(const lvs_matrix *h, const size_t *comp, size_t count, int want_vectors,
                      double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = h->ctx;
  if (vecs) *vecs = NULL;
  int st = lvsi_check_hermitian(h, LVS_DEFAULT_HERM_TOL, "matrix");
  if (st) return st;
  size_t n = lvs_matrix_rows(h);
  if (count == 0 || count > n) count = n;
  if (want_vectors && (st = lvsi_dense_ok(ctx, n, count, h->cplx ? 16 : 8, "eigenvectors"))) return st;
  lvs_matrix *p = NULL;
  if (h->vis && (st = lvs_matrix_visible(h, 0, &p))) return st;
  const lvs_matrix *a = p ? p : h;
  size_t nb = 0;
  size_t *cc = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t));
  if (!cc) {
    lvs_matrix_free(p);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
  }
  if (comp) {
    for (size_t i = 0; i < n; i++) {
      cc[i] = comp[i];
      if (comp[i] + 1 > nb) nb = comp[i] + 1;
    }
    size_t *seen = lvsi_calloc(ctx, nb ? nb : 1, sizeof(size_t));
    if (!seen) st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
    for (size_t i = 0; !st && i < n; i++) seen[cc[i]] = 1;
    for (size_t b = 0; !st && b < nb; b++)
      if (!seen[b]) st = lvsi_fail(ctx, LVS_EINVAL, "block %zu is empty", b + 1);
    lvsi_free(ctx, seen);
  } else {
    st = lvsi_components(a, NULL, cc, &nb);
  }
  if (!st && nb > 1) {
    st = eigen_blocks(a, cc, nb, count, want_vectors, w, vecs);
  } else if (!st && a->sparse && !a->cplx && n > 64 && lvsi_mat_bandwidth(a) == 1) {
    st = eigen_tridiag(a, count, want_vectors, w, vecs);
  } else if (!st) {
    st = lvs_eigen_dense(a, count, want_vectors, w, vecs);
  }
  lvsi_free(ctx, cc);
  lvs_matrix_free(p);
  return st;
}

int lvs_eigen(const lvs_matrix *h, size_t count, int want_vectors, double *w, lvs_matrix **vecs) {
  if (!h->sparse && !h->vis) return lvs_eigen_dense(h, count, want_vectors, w, vecs);
  return lvs_eigen_sectors(h, NULL, count, want_vectors, w, vecs);
}

/* The dense path: dsyevd/zheevd for all pairs, dsyevr/zheevr for a subset. */
int lvs_eigen_dense(const lvs_matrix *h, size_t count, int want_vectors, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = h->ctx;
  if (vecs) *vecs = NULL;
  int st = lvsi_check_hermitian(h, LVS_DEFAULT_HERM_TOL, "matrix");
  if (st) return st;
  size_t n = lvs_matrix_rows(h);
  if (count == 0 || count > n) count = n;
  if (n > 2147483647u) return lvsi_fail(ctx, LVS_ECAP, "matrix of %zu states is too large for LAPACK", n);
  /* cap: working copy plus vectors */
  if ((st = lvsi_dense_ok(ctx, n, n, h->cplx ? 16 : 8, "eigen (working copy)"))) return st;
  if (want_vectors && (st = lvsi_dense_ok(ctx, n, count, h->cplx ? 16 : 8, "eigenvectors"))) return st;
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

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
  /* MRRR / root-free QR: O(n) flops per eigenvalue, a few tens each */
  if ((st = lvsi_fence_cost(ctx, 30.0 * (double)n * (double)count, "eigen (a tridiagonal solve)"))) goto done;
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

/* ---- one sector ------------------------------------------------------ */

enum { M_DENSE, M_KRYLOV, M_TRIDIAG };

/* the kb values of the plain Hermitian block m nearest `near` (ascending)
 * and their vectors, from its full dense spectrum */
static int dense_nearest(const lvs_matrix *m, size_t kb, int want, double near, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = m->ctx;
  size_t s = m->rows, el = m->cplx ? 2 : 1;
  double *wall = lvsi_malloc(ctx, s * sizeof(double));
  lvs_matrix *vall = NULL, *z = NULL;
  int st = wall ? lvs_eigen_dense(m, s, want, wall, want ? &vall : NULL)
                : lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
  if (!st && want) st = lvsi_mat_alloc(ctx, s, kb, m->cplx, 0, 0, &z);
  if (!st) {
    /* the nearest kb form a window of the ascending spectrum: slide it */
    size_t lo = 0;
    while (lo + kb < s && fabs(wall[lo + kb] - near) < fabs(wall[lo] - near)) lo++;
    memcpy(w, wall + lo, kb * sizeof(double));
    if (want) memcpy(z->a, vall->a + lo * s * el, kb * s * el * sizeof(double));
    if (want) *vecs = z, z = NULL;
  }
  lvsi_free(ctx, wall);
  lvs_matrix_free(vall);
  lvs_matrix_free(z);
  return st;
}

/* kb pairs of one plain block by the chosen method; vectors (s x kb dense)
 * into *vecs when want */
static int solve_sector(const lvs_matrix *m, int method, size_t kb, int want, const lvs_eigen_opts *o, double *w,
                        lvs_matrix **vecs) {
  int near = o && o->has_near;
  if (method == M_KRYLOV) {
    lvs_matrix *z = NULL;
    int st = want ? lvsi_mat_alloc(m->ctx, m->rows, kb, m->cplx, 0, 0, &z) : LVS_OK;
    if (!st) st = lvsi_krylov(m, kb, o, w, want ? z->a : NULL);
    if (!st && want) *vecs = z, z = NULL;
    lvs_matrix_free(z);
    return st;
  }
  if (o && o->stats) o->stats->dense_sectors++;
  if (method == M_TRIDIAG) return eigen_tridiag(m, kb, want, w, vecs);
  if (near) return dense_nearest(m, kb, want, o->near, w, vecs);
  return lvs_eigen_dense(m, kb, want, w, vecs);
}

/* ---- the sector plan --------------------------------------------------- */

typedef struct {
  const lvs_matrix *a; /* plain, Hermitian (checked) */
  size_t n, nb, count;
  const size_t *comp;
  int given; /* comp came from the caller (else: the sparsity graph's components) */
  size_t *size, *loc, *order, *start; /* per block size; position in block; states by block */
  int *method;
  size_t *kb; /* pairs wanted from each block */
} splan;

static void splan_free(lvs_ctx *ctx, splan *p) {
  lvsi_free(ctx, p->size);
  lvsi_free(ctx, p->loc);
  lvsi_free(ctx, p->order);
  lvsi_free(ctx, p->start);
  lvsi_free(ctx, p->method);
  lvsi_free(ctx, p->kb);
}

/* sizes, member lists and each block's method; every dense block is checked
 * against the dense cap here, before any block is worked on */
static int splan_init(splan *p, const lvs_eigen_opts *o) {
  lvs_ctx *ctx = p->a->ctx;
  size_t n = p->n, nb = p->nb;
  p->size = lvsi_calloc(ctx, nb, sizeof(size_t));
  p->start = lvsi_calloc(ctx, nb + 1, sizeof(size_t));
  p->loc = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t));
  p->order = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t));
  p->method = lvsi_calloc(ctx, nb, sizeof(int));
  p->kb = lvsi_calloc(ctx, nb, sizeof(size_t));
  if (!p->size || !p->start || !p->loc || !p->order || !p->method || !p->kb)
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (sectors)");
  for (size_t i = 0; i < n; i++) p->loc[i] = p->size[p->comp[i]]++;
  for (size_t b = 0; b < nb; b++) p->start[b + 1] = p->start[b] + p->size[b];
  for (size_t i = 0; i < n; i++) p->order[p->start[p->comp[i]] + p->loc[i]] = i;
  int want_method = o ? o->method : LVS_EIGEN_AUTO, near = o && o->has_near;
  const lvs_matrix *a = p->a;
  /* the caller's sectors: no stored nonzero may couple two of them
   * (connected components cannot) */
  size_t w = a->cplx ? 2 : 1;
  for (size_t j = 0; j < n && p->given; j++) {
    size_t k0 = a->sparse ? a->cp[j] : 0, k1 = a->sparse ? a->cp[j + 1] : n;
    for (size_t k = k0; k < k1; k++) {
      size_t i = a->sparse ? a->ri[k] : k, src = a->sparse ? k : i + j * n;
      double re = a->a[w * src], im = w == 2 ? a->a[w * src + 1] : 0.0;
      if (p->comp[i] != p->comp[j] && (re != 0.0 || im != 0.0))
        return lvsi_fail(ctx, LVS_EINVAL, "entry (%zu, %zu) = %.3g couples two blocks", i + 1, j + 1,
                         hypot(re, im));
    }
  }
  for (size_t b = 0; b < nb; b++) {
    size_t sz = p->size[b], kb = p->count < sz ? p->count : sz;
    int m = M_DENSE;
    int tri = nb == 1 && !near && a->sparse && !a->cplx && n > 64 && lvsi_mat_bandwidth(a) == 1;
    int kry_ok = a->sparse && kb + 2 <= sz;
    if (want_method == LVS_EIGEN_KRYLOV) m = kry_ok ? M_KRYLOV : M_DENSE;
    else if (tri) m = M_TRIDIAG;
    else if (want_method == LVS_EIGEN_AUTO && kry_ok && sz > LVS_KRYLOV_MIN_DIM && kb * 8 <= sz) m = M_KRYLOV;
    p->method[b] = m;
    p->kb[b] = kb;
    int st = LVS_OK;
    if (m == M_DENSE && sz > 1)
      st = lvsi_dense_ok(ctx, sz, sz, a->cplx ? 16 : 8, nb > 1 ? "eigen (dense copy of a sector)" : "eigen (working copy)");
    if (st) return st;
  }
  return LVS_OK;
}

/* block b of the plain op as its own plain matrix (sparse stays sparse) */
static int extract_sector(const splan *p, size_t b, int dense, lvs_matrix **out) {
  const lvs_matrix *a = p->a;
  lvs_ctx *ctx = a->ctx;
  size_t sz = p->size[b], n = p->n, w = a->cplx ? 2 : 1;
  const size_t *mem = p->order + p->start[b];
  size_t nnz = 0;
  if (a->sparse)
    for (size_t c = 0; c < sz; c++) nnz += a->cp[mem[c] + 1] - a->cp[mem[c]];
  lvs_matrix *m = NULL;
  int st = lvsi_mat_alloc(ctx, sz, sz, a->cplx, !dense, nnz, &m);
  if (st) return st;
  for (size_t c = 0; c < sz; c++) {
    size_t j = mem[c];
    if (!dense) m->cp[c] = m->nnz;
    size_t k0 = a->sparse ? a->cp[j] : 0, k1 = a->sparse ? a->cp[j + 1] : n;
    for (size_t k = k0; k < k1; k++) {
      size_t i = a->sparse ? a->ri[k] : k, src = a->sparse ? k : i + j * n;
      double re = a->a[w * src], im = w == 2 ? a->a[w * src + 1] : 0.0;
      if (re == 0.0 && im == 0.0) continue; /* (couplings were refused by splan_init) */
      size_t dst = dense ? p->loc[i] + c * sz : m->nnz++;
      if (!dense) m->ri[dst] = p->loc[i];
      m->a[w * dst] = re;
      if (w == 2) m->a[w * dst + 1] = im;
    }
  }
  if (!dense) m->cp[sz] = m->nnz;
  *out = m;
  return LVS_OK;
}

/* ---- merge -------------------------------------------------------------- */

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

static _Thread_local double tl_near;
static int cmp_evrec_near(const void *x, const void *y) {
  const evrec *a = x, *b = y;
  double da = fabs(a->w - tl_near), db = fabs(b->w - tl_near);
  if (da != db) return da < db ? -1 : 1;
  return cmp_evrec(x, y);
}

/* choose count records (lowest, or nearest `near`), leave them ascending */
static void select_records(evrec *rec, size_t total, size_t count, const lvs_eigen_opts *o) {
  if (o && o->has_near) {
    tl_near = o->near;
    qsort(rec, total, sizeof(evrec), cmp_evrec_near);
    qsort(rec, count, sizeof(evrec), cmp_evrec);
  } else {
    qsort(rec, total, sizeof(evrec), cmp_evrec);
  }
}

/* Spectrum of a plain Hermitian matrix sector by sector (comp[i] in
 * 0..nb-1 is the sector of state i): each sector's lowest (or nearest)
 * min(count, size) pairs by its method, values merged in ascending order
 * (ties by sector, then position: deterministic), vectors scattered into an
 * n x count dense matrix. Sectors are extracted and solved one at a time.
 * source: METHODS.md 4 (symmetry sectors). */
static int eigen_blocks(splan *p, int want, const lvs_eigen_opts *o, double *w, lvs_matrix **vecs) {
  const lvs_matrix *a = p->a;
  lvs_ctx *ctx = a->ctx;
  size_t n = p->n, nb = p->nb, count = p->count, el = a->cplx ? 2 : 1;
  int st = LVS_OK;
  lvs_matrix **bv = lvsi_calloc(ctx, nb, sizeof(lvs_matrix *));
  double **bw = lvsi_calloc(ctx, nb, sizeof(double *));
  double *bstart = NULL;
  evrec *rec = NULL;
  lvs_matrix *z = NULL, *m = NULL;
  if (!bv || !bw) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
    goto done;
  }
  size_t total = 0;
  for (size_t b = 0; b < nb; b++) {
    size_t kb = p->kb[b], sz = p->size[b];
    if (!(bw[b] = lvsi_malloc(ctx, kb * sizeof(double)))) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
      goto done;
    }
    if (sz == 1) { /* a one-state sector needs no solver */
      double re = 0.0;
      size_t j = p->order[p->start[b]];
      double complex v = lvsi_mat_at(a, j, j);
      re = creal(v);
      bw[b][0] = re;
      if (want && !(st = lvsi_mat_alloc(ctx, 1, 1, a->cplx, 0, 0, &bv[b]))) bv[b]->a[0] = 1.0;
      if (st) goto done;
      total += 1;
      continue;
    }
    if ((st = extract_sector(p, b, p->method[b] == M_DENSE, &m))) goto done;
    lvs_eigen_opts ob = o ? *o : (lvs_eigen_opts){0};
    ob.start = NULL;
    if (o && o->start && p->method[b] == M_KRYLOV) { /* the start vector's part in this sector */
      if (!(bstart = lvsi_malloc(ctx, sz * el * sizeof(double)))) {
        st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
        goto done;
      }
      double nrm = 0.0;
      for (size_t c = 0; c < sz; c++)
        for (size_t e = 0; e < el; e++) {
          bstart[el * c + e] = o->start[el * p->order[p->start[b] + c] + e];
          nrm += bstart[el * c + e] * bstart[el * c + e];
        }
      if (nrm > 0.0) ob.start = bstart;
    }
    st = solve_sector(m, p->method[b], kb, want, &ob, bw[b], want ? &bv[b] : NULL);
    lvsi_free(ctx, bstart);
    bstart = NULL;
    lvs_matrix_free(m);
    m = NULL;
    if (st) goto done;
    total += kb;
  }
  if (!(rec = lvsi_malloc(ctx, total * sizeof(evrec)))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen (blocks)");
    goto done;
  }
  size_t r = 0;
  for (size_t b = 0; b < nb; b++)
    for (size_t c = 0; c < p->kb[b]; c++) rec[r++] = (evrec){bw[b][c], b, c};
  select_records(rec, total, count, o);
  for (size_t k = 0; k < count; k++) w[k] = rec[k].w;
  if (want) {
    if ((st = lvsi_mat_alloc(ctx, n, count, a->cplx, 0, 0, &z))) goto done;
    for (size_t k = 0; k < count; k++) {
      size_t b = rec[k].blk, sz = p->size[b];
      const double *src = bv[b]->a + el * sz * rec[k].col;
      const size_t *mem = p->order + p->start[b];
      double *dst = z->a + el * n * k;
      for (size_t c = 0; c < sz; c++)
        for (size_t e = 0; e < el; e++) dst[el * mem[c] + e] = src[el * c + e];
    }
    *vecs = z;
    z = NULL;
  }
done:
  if (bv)
    for (size_t b = 0; b < nb; b++) lvs_matrix_free(bv[b]);
  if (bw)
    for (size_t b = 0; b < nb; b++) lvsi_free(ctx, bw[b]);
  lvsi_free(ctx, bv);
  lvsi_free(ctx, bw);
  lvsi_free(ctx, rec);
  lvsi_free(ctx, bstart);
  lvs_matrix_free(z);
  lvs_matrix_free(m);
  return st;
}

/* options checked once for every entry point */
static int check_opts(lvs_ctx *ctx, const lvs_eigen_opts *o) {
  if (!o) return LVS_OK;
  if (o->method < LVS_EIGEN_AUTO || o->method > LVS_EIGEN_KRYLOV)
    return lvsi_fail(ctx, LVS_EINVAL, "eigen: unknown method %d", o->method);
  if (o->has_near && !isfinite(o->near)) return lvsi_fail(ctx, LVS_EINVAL, "eigen: near must be finite");
  if (!(o->tol >= 0.0) || !isfinite(o->tol))
    return lvsi_fail(ctx, LVS_EINVAL, "eigen: tol must be finite and not negative, got %g", o->tol);
  return LVS_OK;
}

/* the sector numbers: the caller's (checked: every block used) or the
 * connected components of the sparsity graph */
static int sector_numbers(const lvs_matrix *a, const size_t *comp, size_t n, size_t *cc, size_t *nb) {
  lvs_ctx *ctx = a->ctx;
  if (!comp) return lvsi_components(a, NULL, cc, nb);
  *nb = 0;
  for (size_t i = 0; i < n; i++) {
    cc[i] = comp[i];
    if (comp[i] + 1 > *nb) *nb = comp[i] + 1;
  }
  size_t *seen = lvsi_calloc(ctx, *nb ? *nb : 1, sizeof(size_t));
  if (!seen) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
  int st = LVS_OK;
  for (size_t i = 0; i < n; i++) seen[cc[i]] = 1;
  for (size_t b = 0; !st && b < *nb; b++)
    if (!seen[b]) st = lvsi_fail(ctx, LVS_EINVAL, "block %zu is empty", b + 1);
  lvsi_free(ctx, seen);
  return st;
}

/* A complex op whose imaginary parts are all zero (products such as
 * Sy Sy keep complex storage) as a real copy, so the real solvers (Lanczos
 * rather than Arnoldi, dsyevr rather than zheevr) do the work; NULL in
 * *out when some imaginary part is nonzero. */
static int real_copy_if_real(const lvs_matrix *a, lvs_matrix **out) {
  *out = NULL;
  size_t cnt = a->sparse ? a->nnz : a->rows * a->cols;
  for (size_t k = 0; k < cnt; k++)
    if (a->a[2 * k + 1] != 0.0) return LVS_OK;
  lvs_matrix *r = NULL;
  int st = lvsi_mat_alloc(a->ctx, a->rows, a->cols, 0, a->sparse, a->sparse ? a->nnz : 0, &r);
  if (st) return st;
  for (size_t k = 0; k < cnt; k++) r->a[k] = a->a[2 * k];
  if (a->sparse) {
    memcpy(r->cp, a->cp, (a->cols + 1) * sizeof(size_t));
    memcpy(r->ri, a->ri, a->nnz * sizeof *r->ri);
    r->nnz = a->nnz;
  }
  r->band = a->band;
  *out = r;
  return LVS_OK;
}

/* real vectors as a complex matrix (the caller's op was complex) */
static int to_complex(lvs_matrix **vecs) {
  lvs_matrix *v = *vecs, *c = NULL;
  if (!v || v->cplx) return LVS_OK;
  int st = lvsi_mat_alloc(v->ctx, v->rows, v->cols, 1, 0, 0, &c);
  if (st) return st;
  for (size_t k = 0; k < v->rows * v->cols; k++) c->a[2 * k] = v->a[k];
  lvs_matrix_free(v);
  *vecs = c;
  return LVS_OK;
}

/* Order of work, so that an impossible request fails before any work that
 * grows faster than the stored entries: options and sizes, the vectors'
 * cap, the plain visible copy (O(nnz)), the Hermitian check (O(nnz log
 * nnz) on sparse storage), the sectors, every dense sector's cap, then the
 * solves one sector at a time. */
int lvs_eigen_ex(const lvs_matrix *h, const size_t *comp, size_t count, int want_vectors,
                 const lvs_eigen_opts *o, double *w, lvs_matrix **vecs) {
  lvs_ctx *ctx = h->ctx;
  if (vecs) *vecs = NULL;
  int st = check_opts(ctx, o);
  if (st) return st;
  size_t n = lvs_matrix_rows(h);
  if (n != lvs_matrix_cols(h))
    return lvsi_fail(ctx, LVS_EDIM, "matrix must be square, got %zux%zu", n, lvs_matrix_cols(h));
  if (count == 0 || count > n) count = n;
  if (want_vectors && (st = lvsi_dense_ok(ctx, n, count, h->cplx ? 16 : 8, "eigenvectors"))) return st;
  if (o && o->method == LVS_EIGEN_KRYLOV && !h->sparse)
    return lvsi_fail(ctx, LVS_EINVAL, "eigen: method 'krylov' needs a sparse matrix (this one is stored dense)");
  lvs_matrix *p = NULL; /* the plain visible copy of a padded op */
  if (h->vis && (st = lvs_matrix_visible(h, 0, &p))) return st;
  const lvs_matrix *a = p ? p : h;
  if (a->cplx) { /* complex storage of a real op: solve it as real */
    lvs_matrix *r = NULL;
    st = real_copy_if_real(a, &r);
    if (st || r) {
      lvs_matrix_free(p);
      if (!st) st = lvs_eigen_ex(r, comp, count, want_vectors, o, w, vecs);
      lvs_matrix_free(r);
      if (!st && want_vectors && vecs) st = to_complex(vecs);
      if (st && vecs) lvs_matrix_free(*vecs), *vecs = NULL;
      return st;
    }
  }
  if (!h->sparse && !h->vis && !comp) { /* plain dense: LAPACK on the whole */
    if (o && o->stats) o->stats->dense_sectors++;
    if (o && o->has_near) {
      if ((st = lvsi_check_hermitian(h, LVS_DEFAULT_HERM_TOL, "matrix"))) return st;
      return dense_nearest(h, count, want_vectors, o->near, w, vecs);
    }
    return lvs_eigen_dense(h, count, want_vectors, w, vecs);
  }
  if (o && o->has_near && a->sparse) {
    double glo, ghi;
    lvsi_gershgorin(a, &glo, &ghi);
    if (!(o->near >= glo && o->near <= ghi)) {
      lvs_matrix_free(p);
      return lvsi_fail(ctx, LVS_EINVAL,
                       "eigen: near = %.6g lies outside the spectrum's range [%.6g, %.6g] (Gershgorin bounds)",
                       o->near, glo, ghi);
    }
  }
  size_t *cc = NULL;
  splan pl = {0};
  if (!(o && o->hermitian) && (st = lvsi_check_hermitian(a, LVS_DEFAULT_HERM_TOL, "matrix"))) goto done;
  if (!(cc = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t)))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in eigen");
    goto done;
  }
  pl.a = a;
  pl.n = n;
  pl.count = count;
  pl.comp = cc;
  pl.given = comp != NULL;
  if ((st = sector_numbers(a, comp, n, cc, &pl.nb))) goto done;
  if ((st = splan_init(&pl, o))) goto done;
  if (pl.nb == 1) { /* one sector: the op itself, no copy */
    st = solve_sector(a, pl.method[0], count, want_vectors, o, w, vecs);
  } else {
    /* many sectors, some by ARPACK: the small dense ones gain nothing from
     * BLAS threads, and waking the pool between Krylov runs leaves its
     * threads spinning against the products' second thread */
    int bt = 0, big = 0;
    for (size_t b = 0; b < pl.nb; b++)
      if (pl.method[b] == M_KRYLOV) {
        if (!bt) bt = lvsi_blas_threads();
        big |= pl.size[b] > ((size_t)1 << 17); /* krylov.c keeps the threads there */
      }
    if (big) bt = 0;
    if (bt > 1) lvsi_set_blas_threads(1);
    st = eigen_blocks(&pl, want_vectors, o, w, vecs);
    if (bt > 1) lvsi_set_blas_threads(bt), lvsi_blas_pool_stop();
  }
done:
  splan_free(ctx, &pl);
  lvsi_free(ctx, cc);
  lvs_matrix_free(p);
  return st;
}

int lvs_eigen_sectors(const lvs_matrix *h, const size_t *comp, size_t count, int want_vectors,
                      double *w, lvs_matrix **vecs) {
  return lvs_eigen_ex(h, comp, count, want_vectors, NULL, w, vecs);
}

int lvs_eigen(const lvs_matrix *h, size_t count, int want_vectors, double *w, lvs_matrix **vecs) {
  return lvs_eigen_ex(h, NULL, count, want_vectors, NULL, w, vecs);
}

/* LAPACK's workspaces through the context's allocator, so that a host's
 * memory cap bounds them as it bounds everything else of the core (the
 * high-level LAPACKE calls malloc their own: a 3000-state solve peaked at
 * 222 MiB under a 150 MiB cap). A workspace query first, then the _work
 * routine. */
typedef struct {
  lapack_int lwork, lrwork, liwork; /* sizes from the query */
  void *work, *rwork, *iwork;
} lapack_ws;

/* the workspace a query asked for (work is complex for a complex solver,
 * rwork only then) */
static int ws_take(lvs_ctx *ctx, int cplx, lapack_ws *ws) {
  size_t we = cplx ? sizeof(double complex) : sizeof(double);
  ws->work = lvsi_malloc(ctx, (ws->lwork > 0 ? (size_t)ws->lwork : 1) * we);
  ws->iwork = lvsi_malloc(ctx, (ws->liwork > 0 ? (size_t)ws->liwork : 1) * sizeof(lapack_int));
  ws->rwork = cplx ? lvsi_malloc(ctx, (ws->lrwork > 0 ? (size_t)ws->lrwork : 1) * sizeof(double)) : NULL;
  if (ws->work && ws->iwork && (!cplx || ws->rwork)) return LVS_OK;
  return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for LAPACK's workspace in eigen");
}

static void ws_free(lvs_ctx *ctx, lapack_ws *ws) {
  lvsi_free(ctx, ws->work), lvsi_free(ctx, ws->rwork), lvsi_free(ctx, ws->iwork);
}

/* the sizes a workspace query left in its one-element arrays */
static void ws_sizes(lapack_ws *ws, int cplx, double complex qz, double qd, double qr, lapack_int qi) {
  ws->lwork = (lapack_int)(cplx ? creal(qz) : qd);
  ws->lrwork = (lapack_int)qr;
  ws->liwork = qi;
}

/* flops of a dense Hermitian solve of order N (Golub & Van Loan, Matrix
 * Computations, 4th ed., 2013, section 8.3: 4N^3/3 for the tridiagonal
 * reduction, about as much again or more for the vectors; x4 complex) */
static double eig_flops(int cplx, char jobz, lapack_int N) {
  double n3 = (double)N * (double)N * (double)N;
  return (cplx ? 4.0 : 1.0) * (jobz == 'V' ? 6.0 : 4.0 / 3.0) * n3;
}

static int syevd_ws(lvs_ctx *ctx, int cplx, char jobz, lapack_int N, double *a, double *w, lapack_int *info) {
  lapack_ws ws = {0};
  int fst = lvsi_fence_cost(ctx, eig_flops(cplx, jobz, N), "eigen (a dense solve)");
  if (fst) {
    *info = 0;
    return fst;
  }
  double complex qz = 0;
  double qd = 0, qr = 0;
  lapack_int qi = 0;
  *info = cplx ? LAPACKE_zheevd_work(LAPACK_COL_MAJOR, jobz, 'L', N, (lapack_complex_double *)a, N, w,
                                     (lapack_complex_double *)&qz, -1, &qr, -1, &qi, -1)
               : LAPACKE_dsyevd_work(LAPACK_COL_MAJOR, jobz, 'L', N, a, N, w, &qd, -1, &qi, -1);
  if (*info) return LVS_OK;
  ws_sizes(&ws, cplx, qz, qd, qr, qi);
  int st = ws_take(ctx, cplx, &ws);
  if (!st)
    *info = cplx ? LAPACKE_zheevd_work(LAPACK_COL_MAJOR, jobz, 'L', N, (lapack_complex_double *)a, N, w, ws.work,
                                       ws.lwork, ws.rwork, ws.lrwork, ws.iwork, ws.liwork)
                 : LAPACKE_dsyevd_work(LAPACK_COL_MAJOR, jobz, 'L', N, a, N, w, ws.work, ws.lwork, ws.iwork,
                                       ws.liwork);
  ws_free(ctx, &ws);
  return st;
}

static int syevr_ws(lvs_ctx *ctx, int cplx, char jobz, lapack_int N, double *a, lapack_int count, lapack_int *found,
                    double *w, double *z, lapack_int ldz, lapack_int *isuppz, lapack_int *info) {
  lapack_ws ws = {0};
  int fst = lvsi_fence_cost(ctx, eig_flops(cplx, 'N', N), "eigen (a dense solve)");
  if (fst) {
    *info = 0;
    return fst;
  }
  double complex qz = 0;
  double qd = 0, qr = 0;
  lapack_int qi = 0;
  lapack_complex_double *ac = (lapack_complex_double *)a, *zc = (lapack_complex_double *)z;
  *info = cplx ? LAPACKE_zheevr_work(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, ac, N, 0, 0, 1, count, 0.0, found, w, zc,
                                     ldz, isuppz, (lapack_complex_double *)&qz, -1, &qr, -1, &qi, -1)
               : LAPACKE_dsyevr_work(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, a, N, 0, 0, 1, count, 0.0, found, w, z,
                                     ldz, isuppz, &qd, -1, &qi, -1);
  if (*info) return LVS_OK;
  ws_sizes(&ws, cplx, qz, qd, qr, qi);
  int st = ws_take(ctx, cplx, &ws);
  if (!st)
    *info = cplx ? LAPACKE_zheevr_work(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, ac, N, 0, 0, 1, count, 0.0, found, w, zc,
                                       ldz, isuppz, ws.work, ws.lwork, ws.rwork, ws.lrwork, ws.iwork, ws.liwork)
                 : LAPACKE_dsyevr_work(LAPACK_COL_MAJOR, jobz, 'I', 'L', N, a, N, 0, 0, 1, count, 0.0, found, w, z,
                                       ldz, isuppz, ws.work, ws.lwork, ws.iwork, ws.liwork);
  ws_free(ctx, &ws);
  return st;
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
    if ((st = syevd_ws(ctx, h->cplx, jobz, N, a->a, w, &info))) goto done;
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
    st = syevr_ws(ctx, h->cplx, jobz, N, a->a, (lapack_int)count, &found, wfull, z->a, ldz, isuppz, &info);
    if (st) {
      lvsi_free(ctx, isuppz);
      lvsi_free(ctx, wfull);
      goto done;
    }
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

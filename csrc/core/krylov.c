/* krylov.c -- a few eigenpairs of a large sparse Hermitian op by ARPACK.
 *
 * Real symmetric: the implicitly restarted Lanczos method (dsaupd/dseupd;
 * D. C. Sorensen, SIAM J. Matrix Anal. Appl. 13, 357 (1992); R. B. Lehoucq,
 * D. C. Sorensen, C. Yang, "ARPACK Users' Guide", SIAM 1998, sections 2.3
 * and 4.2). Complex Hermitian: the implicitly restarted Arnoldi method
 * (znaupd/zneupd; ARPACK has no complex Hermitian driver), whose Ritz values
 * are real to rounding; we keep their real parts.
 *
 * Lowest levels: mode 1, which = "SA" (smallest algebraic; "SR" for the
 * complex driver), OP = H. Levels nearest a target sigma (`near`): mode 3,
 * shift-invert, which = "LM", OP = (H - sigma)^{-1} applied by a sparse LU
 * factorization (sparse_lu.c, UMFPACK) computed once; dseupd/zneupd map the
 * Ritz values back to lambda = sigma + 1/nu (Users' Guide section 3.2).
 *
 * Convergence: ARPACK's test |residual| <= tol |theta| per Ritz value, with
 * tol = 0 meaning machine precision (the Users' Guide's default, and
 * SciPy's eigsh default). A run that ends without every requested value
 * converged is LVS_ENOCONV naming the tolerance, the restarts and how many
 * converged; it never returns unconverged numbers. The start vector is a
 * fixed pseudo-random vector (splitmix64 of the index), so the same op
 * gives the same numbers in every call, or the caller's (sweeps pass the
 * previous point's vectors).
 *
 * Products: see "the product y = H x" below (a gather on the op's own
 * storage, two threads above 2 LVSI_KRYLOV_THREAD_NNZ entries). */
#include <arpack.h>
#include <float.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define LVSI_KRYLOV_THREAD_NNZ 100000

/* ---- the product y = H x ---------------------------------------------
 *
 * A gather per column on the op's own CSC storage (32-bit row indices, 12
 * bytes an entry): H Hermitian, so column j is the conjugate of row j and
 * y_j = sum_k conj(H_kj) x_k. No copy of the op (an earlier lower-triangle
 * copy with scatters was no faster and cost 47 MB at 2^18 states). Two
 * threads take the columns [0, s) and [s, n), s balancing the entries, above
 * 2 LVSI_KRYLOV_THREAD_NNZ entries; each writes only its own y_j, and the
 * sums do not depend on the thread count. */

struct lvsi_symop {
  lvs_ctx *ctx;
  size_t n, nnz, split;
  int cplx, threads;
  const size_t *cp; /* BORROWED from the op, which must outlive this */
  const uint32_t *ri;
  const double *v;
  double *sx, *sy; /* real op, complex vectors: the parts (n each) */
  /* a real op with few distinct values (a spin chain has a few dozen):
   * entry k's value is tab[code[k]], one byte a value instead of eight, so
   * a product reads 5 bytes an entry instead of 12 (the product is bound by
   * memory traffic); NULL: values read from v */
  uint8_t *code;
  double tab[256];
};
typedef struct lvsi_symop symop;

static void symop_clear(lvs_ctx *ctx, symop *s) {
  lvsi_free(ctx, s->sx);
  lvsi_free(ctx, s->sy);
  lvsi_free(ctx, s->code);
  s->code = NULL;
}

#define SYM_CODE_MIN_NNZ 65536 /* smaller ops fit the caches anyway */

/* the value codes of a real op when it has at most 256 distinct values
 * (compared bit for bit; -0.0 and 0.0 are two codes), else none: a hash
 * table of 512 slots on the values' bits, given up at the 257th value */
static void symop_codes(symop *s) {
  if (s->cplx || s->nnz < SYM_CODE_MIN_NNZ) return;
  uint8_t *code = lvsi_malloc(s->ctx, s->nnz);
  if (!code) { /* not needed: the plain values serve */
    lvs_clear_error(s->ctx);
    return;
  }
  uint64_t key[512];
  int16_t slot[512];
  memset(slot, -1, sizeof slot);
  int nt = 0;
  for (size_t k = 0; k < s->nnz; k++) {
    uint64_t b;
    memcpy(&b, &s->v[k], sizeof b);
    uint64_t h = (b ^ (b >> 29)) * 0x9E3779B97F4A7C15ULL;
    size_t i = (size_t)(h >> 55); /* 9 bits */
    while (slot[i] >= 0 && key[i] != b) i = (i + 1) & 511;
    if (slot[i] < 0) {
      if (nt == 256) {
        lvsi_free(s->ctx, code);
        return;
      }
      key[i] = b;
      slot[i] = (int16_t)nt;
      s->tab[nt++] = s->v[k];
    }
    code[k] = (uint8_t)slot[i];
  }
  s->code = code;
}

static int symop_init(symop *s, const lvs_matrix *a) {
  memset(s, 0, sizeof *s);
  s->ctx = a->ctx;
  s->n = a->cols;
  s->cplx = a->cplx;
  s->cp = a->cp, s->ri = a->ri, s->v = a->a;
  s->nnz = a->nnz;
  s->threads = s->nnz >= 2 * LVSI_KRYLOV_THREAD_NNZ ? 2 : 1;
  size_t half = s->nnz / 2, lo = 0, hi = s->n;
  while (lo < hi) { /* first column whose start passes half the entries */
    size_t mid = lo + (hi - lo) / 2;
    if (a->cp[mid] < half) lo = mid + 1;
    else hi = mid;
  }
  s->split = lo;
  symop_codes(s);
  return LVS_OK;
}

typedef struct {
  const symop *s;
  const double *x;
  double *y;
  size_t j0, j1; /* columns [j0, j1) */
} sym_part;

static void *sym_thread(void *arg) {
  const sym_part *p = arg;
  const symop *s = p->s;
  const size_t *cp = s->cp;
  const uint32_t *ri = s->ri;
  const double *v = s->v, *x = p->x;
  double *y = p->y;
  if (!s->cplx && s->code) {
    const uint8_t *c = s->code;
    const double *tab = s->tab;
    for (size_t j = p->j0; j < p->j1; j++) {
      double s0 = 0.0, s1 = 0.0;
      size_t k = cp[j], e = cp[j + 1];
      for (; k + 1 < e; k += 2) {
        s0 += tab[c[k]] * x[ri[k]];
        s1 += tab[c[k + 1]] * x[ri[k + 1]];
      }
      if (k < e) s0 += tab[c[k]] * x[ri[k]];
      y[j] = s0 + s1;
    }
    return NULL;
  }
  if (!s->cplx) {
    for (size_t j = p->j0; j < p->j1; j++) {
      double s0 = 0.0, s1 = 0.0;
      size_t k = cp[j], e = cp[j + 1];
      for (; k + 1 < e; k += 2) {
        s0 += v[k] * x[ri[k]];
        s1 += v[k + 1] * x[ri[k + 1]];
      }
      if (k < e) s0 += v[k] * x[ri[k]];
      y[j] = s0 + s1;
    }
    return NULL;
  }
  for (size_t j = p->j0; j < p->j1; j++) {
    double sr = 0.0, si = 0.0;
    for (size_t k = cp[j]; k < cp[j + 1]; k++) {
      double ar = v[2 * k], ai = v[2 * k + 1], xr = x[2 * ri[k]], xi = x[2 * ri[k] + 1];
      sr += ar * xr + ai * xi; /* conj(h) x */
      si += ar * xi - ai * xr;
    }
    y[2 * j] = sr;
    y[2 * j + 1] = si;
  }
  return NULL;
}

static void sym_apply(const symop *s, const double *x, double *y) {
  size_t n = s->n;
  sym_part p0 = {s, x, y, 0, n}, p1 = {s, x, y, s->split, n};
  pthread_t t;
  if (s->threads > 1 && (p0.j1 = s->split, pthread_create(&t, NULL, sym_thread, &p1) == 0)) {
    sym_thread(&p0);
    pthread_join(t, NULL);
    return;
  }
  p0.j1 = n; /* one thread (or none could be started): all columns here */
  sym_thread(&p0);
}

/* the product as an object for other solvers (resolvent.c): H x for a
 * complex vector x (interleaved), whether H is real or complex */
int lvsi_symop_new(const lvs_matrix *a, lvsi_symop **out) {
  *out = NULL;
  if (!a->sparse || a->vis || a->rows != a->cols || a->rows > UINT32_MAX)
    return lvsi_fail(a->ctx, LVS_EINVAL, "sparse product: needs a plain sparse square matrix below 2^32 states");
  symop *s = lvsi_malloc(a->ctx, sizeof *s);
  if (!s) return lvsi_fail(a->ctx, LVS_ENOMEM, "out of memory");
  int st = symop_init(s, a);
  if (st) {
    lvsi_free(a->ctx, s);
    return st;
  }
  if (!s->cplx) { /* the parts of a complex vector, for a real op */
    s->sx = lvsi_malloc(a->ctx, (s->n ? s->n : 1) * sizeof(double));
    s->sy = lvsi_malloc(a->ctx, (s->n ? s->n : 1) * sizeof(double));
    if (!s->sx || !s->sy) {
      lvsi_symop_free(s);
      return lvsi_fail(a->ctx, LVS_ENOMEM, "out of memory");
    }
  }
  *out = s;
  return LVS_OK;
}

void lvsi_symop_free(lvsi_symop *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  symop_clear(ctx, s);
  lvsi_free(ctx, s);
}

void lvsi_symop_apply_complex(lvsi_symop *s, const double *x, double *y) {
  size_t n = s->n;
  if (s->cplx) {
    sym_apply(s, x, y);
    return;
  }
  int has_im = 0;
  for (size_t i = 0; i < n; i++) {
    s->sx[i] = x[2 * i];
    has_im |= x[2 * i + 1] != 0.0;
  }
  sym_apply(s, s->sx, s->sy);
  for (size_t i = 0; i < n; i++) y[2 * i] = s->sy[i], y[2 * i + 1] = 0.0;
  if (!has_im) return;
  for (size_t i = 0; i < n; i++) s->sx[i] = x[2 * i + 1];
  sym_apply(s, s->sx, s->sy);
  for (size_t i = 0; i < n; i++) y[2 * i + 1] = s->sy[i];
}

/* ---- shift-invert operator ------------------------------------------- */

/* H - sigma as a new CSC copy (every diagonal entry present) */
static int shifted_copy(const lvs_matrix *a, double sigma, size_t **pcp, size_t **pri, double **pv) {
  lvs_ctx *ctx = a->ctx;
  size_t n = a->cols, w = a->cplx ? 2 : 1;
  size_t cap = a->nnz + n;
  size_t *cp = lvsi_malloc(ctx, (n + 1) * sizeof(size_t));
  size_t *ri = lvsi_malloc(ctx, cap * sizeof(size_t));
  double *v = lvsi_malloc(ctx, cap * w * sizeof(double));
  if (!cp || !ri || !v) {
    lvsi_free(ctx, cp);
    lvsi_free(ctx, ri);
    lvsi_free(ctx, v);
    return lvsi_fail(ctx, LVS_ENOMEM, "eigen: out of memory for the shifted matrix");
  }
  size_t q = 0;
  for (size_t j = 0; j < n; j++) {
    cp[j] = q;
    int diag = 0;
    for (size_t k = a->cp[j]; k <= a->cp[j + 1]; k++) {
      int end = k == a->cp[j + 1];
      size_t i = end ? SIZE_MAX : a->ri[k];
      if (!diag && i > j) { /* the diagonal goes here (rows stay ascending) */
        ri[q] = j;
        v[w * q] = -sigma;
        if (w == 2) v[2 * q + 1] = 0.0;
        q++;
        diag = 1;
      }
      if (end) break;
      ri[q] = i;
      v[w * q] = a->a[w * k] - (i == j ? sigma : 0.0);
      if (w == 2) v[2 * q + 1] = a->a[2 * k + 1];
      diag |= i == j;
      q++;
    }
  }
  cp[n] = q;
  *pcp = cp;
  *pri = ri;
  *pv = v;
  return LVS_OK;
}

/* ---- Gershgorin bounds (for `near`) ----------------------------------- */

void lvsi_gershgorin(const lvs_matrix *a, double *lo, double *hi) {
  double l = INFINITY, h = -INFINITY;
  size_t w = a->cplx ? 2 : 1;
  for (size_t j = 0; j < a->cols; j++) {
    double d = 0.0, r = 0.0;
    for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
      double m = w == 2 ? hypot(a->a[2 * k], a->a[2 * k + 1]) : fabs(a->a[k]);
      if (a->ri[k] == j) d = a->a[w * k];
      else r += m; /* column sums: H Hermitian, so rows and columns agree */
    }
    if (d - r < l) l = d - r;
    if (d + r > h) h = d + r;
  }
  if (a->cols == 0) l = h = 0.0;
  *lo = l;
  *hi = h;
}

/* ---- the ARPACK drivers ----------------------------------------------- */

static pthread_mutex_t arpack_lock = PTHREAD_MUTEX_INITIALIZER;

typedef struct {
  const lvs_matrix *a; /* plain sparse Hermitian, n x n */
  size_t n, nev, ncv, maxit;
  double tol;
  int near_mode;
  double sigma;
  const double *start;
  lvsi_splu *lu;
  symop mv;
  size_t restarts, products;
} kjob;

static void default_start(double *r, size_t n, int cplx) {
  uint64_t s = 0x6c657665 ^ (uint64_t)n;
  for (size_t i = 0; i < n * (cplx ? 2 : 1); i++) {
    uint64_t z = (s += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    z ^= z >> 31;
    r[i] = (double)(z >> 11) * 0x1.0p-53 - 0.5;
  }
}

/* y = OP x: H x, or (H - sigma)^{-1} x */
static int op_apply(kjob *j, const double *x, double *y) {
  j->products++;
  int st = lvsi_fence(j->a->ctx, "eigen (Krylov)");
  if (st) return st;
  if (j->near_mode) return lvsi_splu_solve(j->lu, x, y);
  sym_apply(&j->mv, x, y);
  return LVS_OK;
}

static int arpack_info_error(lvs_ctx *ctx, const char *routine, int info, const kjob *j) {
  if (info == -9999)
    return lvsi_fail(ctx, LVS_ENOCONV,
                     "eigen: krylov method: ARPACK could not build a Krylov basis of %zu vectors (the start vector lies"
                     " in an invariant subspace of fewer states); lower ncv or use method = 'dense'",
                     j->ncv);
  if (info == 3)
    return lvsi_fail(ctx, LVS_ENOCONV,
                     "eigen: krylov method: ARPACK found no shifts to apply after %zu restarts (ncv %zu too small for %zu"
                     " levels); raise ncv",
                     j->restarts, j->ncv, j->nev);
  return lvsi_fail(ctx, LVS_ELAPACK, "eigen: krylov method: ARPACK %s failed (info %d)", routine, info);
}

/* the end of an ARPACK iteration: every wanted value converged (info 0 and
 * nconv >= nev), or the reason it did not */
static int aupd_status(lvs_ctx *ctx, const char *routine, int info, int nconv, const kjob *j) {
  if (info == 0 && nconv >= 0 && (size_t)nconv >= j->nev) return LVS_OK;
  if (info == 0 || info == 1)
    return lvsi_fail(ctx, LVS_ENOCONV,
                     "eigen: krylov method: ARPACK did not converge: %d of %zu levels after %zu restarts (tol %.3g,"
                     " ncv %zu); raise maxiter or ncv",
                     nconv, j->nev, j->restarts, j->tol, j->ncv);
  return arpack_info_error(ctx, routine, info, j);
}

/* lowest (or nearest) nev pairs of a real symmetric op: values ascending in
 * w, vectors n x nev column-major in z (NULL: no vectors) */
static int run_real(kjob *j, double *w, double *z) {
  lvs_ctx *ctx = j->a->ctx;
  a_int n = (a_int)j->n, nev = (a_int)j->nev, ncv = (a_int)j->ncv;
  a_int lworkl = ncv * (ncv + 8);
  double *resid = lvsi_malloc(ctx, j->n * sizeof(double));
  double *v = lvsi_malloc(ctx, j->n * j->ncv * sizeof(double));
  double *workd = lvsi_malloc(ctx, 3 * j->n * sizeof(double));
  double *workl = lvsi_malloc(ctx, (size_t)lworkl * sizeof(double));
  double *d = lvsi_malloc(ctx, j->ncv * sizeof(double));
  a_int *select = lvsi_calloc(ctx, j->ncv, sizeof(a_int));
  int st = LVS_OK;
  if (!resid || !v || !workd || !workl || !d || !select) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "eigen: krylov method: out of memory for %zu Lanczos vectors of %zu states", j->ncv,
                   j->n);
    goto done;
  }
  if (j->start) memcpy(resid, j->start, j->n * sizeof(double));
  else default_start(resid, j->n, 0);
  a_int iparam[11] = {0}, ipntr[14] = {0}, ido = 0, info = 1;
  iparam[0] = 1; /* exact shifts */
  iparam[2] = (a_int)j->maxit;
  iparam[6] = j->near_mode ? 3 : 1;
  const char *which = j->near_mode ? "LM" : "SA";
  for (;;) {
    dsaupd_c(&ido, "I", n, which, nev, j->tol, resid, ncv, v, n, iparam, ipntr, workd, workl, lworkl, &info);
    if (ido == 1 || ido == -1) {
      if ((st = op_apply(j, workd + ipntr[0] - 1, workd + ipntr[1] - 1))) goto done;
    } else {
      break;
    }
  }
  j->restarts = (size_t)iparam[2];
  if ((st = aupd_status(ctx, "dsaupd", (int)info, (int)iparam[4], j))) goto done;
  a_int ierr = 0;
  dseupd_c(z != NULL, "A", select, d, z ? z : v, n, j->sigma, "I", n, which, nev, j->tol, resid, ncv, v, n, iparam,
           ipntr, workd, workl, lworkl, &ierr);
  if (ierr != 0) {
    st = arpack_info_error(ctx, "dseupd", (int)ierr, j);
    goto done;
  }
  memcpy(w, d, j->nev * sizeof(double)); /* sorted by the caller */
done:
  lvsi_free(ctx, resid);
  lvsi_free(ctx, v);
  lvsi_free(ctx, workd);
  lvsi_free(ctx, workl);
  lvsi_free(ctx, d);
  lvsi_free(ctx, select);
  return st;
}

typedef struct {
  double w;
  size_t k;
} wk;
static int cmp_wk(const void *x, const void *y) {
  const wk *a = x, *b = y;
  return a->w < b->w ? -1 : a->w > b->w ? 1 : (a->k > b->k) - (a->k < b->k);
}

/* the complex Hermitian case by the Arnoldi driver; values sorted ascending
 * and the vectors permuted to match */
static int run_complex(kjob *j, double *w, double *z) {
  lvs_ctx *ctx = j->a->ctx;
  a_int n = (a_int)j->n, nev = (a_int)j->nev, ncv = (a_int)j->ncv;
  a_int lworkl = 3 * ncv * ncv + 5 * ncv;
  double complex *resid = lvsi_malloc(ctx, j->n * sizeof(double complex));
  double complex *v = lvsi_malloc(ctx, j->n * j->ncv * sizeof(double complex));
  double complex *workd = lvsi_malloc(ctx, 3 * j->n * sizeof(double complex));
  double complex *workl = lvsi_malloc(ctx, (size_t)lworkl * sizeof(double complex));
  double complex *d = lvsi_malloc(ctx, (j->nev + 1) * sizeof(double complex));
  double complex *workev = lvsi_malloc(ctx, 2 * j->ncv * sizeof(double complex));
  double complex *zz = z ? lvsi_malloc(ctx, j->n * j->nev * sizeof(double complex)) : NULL;
  double *rwork = lvsi_malloc(ctx, j->ncv * sizeof(double));
  a_int *select = lvsi_calloc(ctx, j->ncv, sizeof(a_int));
  wk *ord = lvsi_malloc(ctx, j->nev * sizeof(wk));
  int st = LVS_OK;
  if (!resid || !v || !workd || !workl || !d || !workev || (z && !zz) || !rwork || !select || !ord) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "eigen: krylov method: out of memory for %zu Arnoldi vectors of %zu states", j->ncv,
                   j->n);
    goto done;
  }
  if (j->start) memcpy(resid, j->start, j->n * sizeof(double complex));
  else default_start((double *)resid, j->n, 1);
  a_int iparam[11] = {0}, ipntr[14] = {0}, ido = 0, info = 1;
  iparam[0] = 1;
  iparam[2] = (a_int)j->maxit;
  iparam[6] = j->near_mode ? 3 : 1;
  const char *which = j->near_mode ? "LM" : "SR";
  for (;;) {
    znaupd_c(&ido, "I", n, which, nev, j->tol, resid, ncv, v, n, iparam, ipntr, workd, workl, lworkl, rwork, &info);
    if (ido == 1 || ido == -1) {
      if ((st = op_apply(j, (const double *)(workd + ipntr[0] - 1), (double *)(workd + ipntr[1] - 1)))) goto done;
    } else {
      break;
    }
  }
  j->restarts = (size_t)iparam[2];
  if ((st = aupd_status(ctx, "znaupd", (int)info, (int)iparam[4], j))) goto done;
  a_int ierr = 0;
  zneupd_c(z != NULL, "A", select, d, zz ? zz : v, n, CMPLX(j->sigma, 0.0), workev, "I", n, which, nev, j->tol,
           resid, ncv, v, n, iparam, ipntr, workd, workl, lworkl, rwork, &ierr);
  if (ierr != 0) {
    st = arpack_info_error(ctx, "zneupd", (int)ierr, j);
    goto done;
  }
  for (size_t k = 0; k < j->nev; k++) ord[k] = (wk){creal(d[k]), k};
  qsort(ord, j->nev, sizeof(wk), cmp_wk);
  for (size_t k = 0; k < j->nev; k++) {
    w[k] = ord[k].w;
    if (z) memcpy(z + 2 * j->n * k, zz + j->n * ord[k].k, j->n * sizeof(double complex));
  }
done:
  lvsi_free(ctx, resid);
  lvsi_free(ctx, v);
  lvsi_free(ctx, workd);
  lvsi_free(ctx, workl);
  lvsi_free(ctx, d);
  lvsi_free(ctx, workev);
  lvsi_free(ctx, zz);
  lvsi_free(ctx, rwork);
  lvsi_free(ctx, select);
  lvsi_free(ctx, ord);
  return st;
}

/* Public-facing internal entry: count pairs of the plain sparse Hermitian
 * n x n op a (checked by the caller): the lowest, or the nearest to
 * o->near when o->has_near, values ascending in w; vectors into z (n x
 * count dense column-major, complex interleaved when a is complex; NULL:
 * none). */
int lvsi_krylov(const lvs_matrix *a, size_t count, const lvs_eigen_opts *o, double *w, double *z) {
  lvs_ctx *ctx = a->ctx;
  size_t n = a->rows;
  kjob j = {0};
  j.a = a;
  j.n = n;
  j.nev = count;
  if (!a->sparse || a->vis || n != a->cols)
    return lvsi_fail(ctx, LVS_EINVAL, "eigen: krylov method: needs a plain sparse square matrix");
  size_t minv = a->cplx ? 2 : 1; /* znaupd: nev <= n - 2; dsaupd: nev < n */
  if (count < 1 || count + minv > n)
    return lvsi_fail(ctx, LVS_ERANGE,
                     "eigen: krylov method: count %zu is too large for %zu states (at most %zu); use method = 'dense'",
                     count, n, n > minv ? n - minv : 0);
  size_t ncv = o && o->ncv ? o->ncv : (2 * count + 1 > 20 ? 2 * count + 1 : 20);
  if (ncv > n) ncv = n;
  if (ncv < count + minv) ncv = count + minv > n ? n : count + minv;
  if (ncv <= count || (a->cplx && ncv < count + 2))
    return lvsi_fail(ctx, LVS_ERANGE, "eigen: krylov method: ncv %zu must exceed count %zu by %zu (and be at most %zu)",
                     ncv, count, minv, n);
  j.ncv = ncv;
  j.maxit = o && o->maxiter ? o->maxiter : (n * 10 > 1000 ? n * 10 : 1000);
  if (j.maxit > 2147483647u) j.maxit = 2147483647u;
  /* tol 0: machine epsilon 2^-52 (DBL_EPSILON). ARPACK's own default is
   * LAPACK's dlamch('E') = 2^-53, half of it, which on a 16-site chain
   * took 395 products against 231 for the same four levels */
  j.tol = o && o->tol > 0 ? o->tol : DBL_EPSILON;
  j.start = o ? o->start : NULL;
  if (n > 2147483647u / (ncv + 8))
    return lvsi_fail(ctx, LVS_ECAP, "eigen: krylov method: %zu states is too large for ARPACK's 32-bit indices", n);
  int st = lvsi_dense_ok(ctx, n, ncv, a->cplx ? 16 : 8, "eigen: krylov method (Lanczos vectors)");
  if (st) return st;
  if (o && o->has_near) {
    /* (lvs_eigen_ex checks near against the whole op's Gershgorin range;
     * one sector's range may leave it outside: then its levels nearest near
     * are its extreme ones, which shift-invert finds as well) */
    j.near_mode = 1;
    j.sigma = o->near;
    size_t *cp = NULL, *ri = NULL;
    double *v = NULL;
    if ((st = shifted_copy(a, o->near, &cp, &ri, &v))) return st;
    st = lvsi_splu_new(ctx, n, a->cplx, cp, ri, v, "eigen (shift-invert)", &j.lu);
    lvsi_free(ctx, cp);
    lvsi_free(ctx, ri);
    lvsi_free(ctx, v);
    if (st == LVS_EINVAL)
      return lvsi_fail(ctx, LVS_EINVAL,
                       "eigen: near = %.17g is on a level: H - near is singular (move the target off the level)",
                       o->near);
    if (st) return st;
  } else if ((st = symop_init(&j.mv, a))) { /* n < 2^31 (checked above) */
    return st;
  }
  /* ARPACK keeps its iteration state in Fortran SAVE variables, so two
   * solves at once in one process corrupt each other (seen: heap aborts and
   * false non-convergence with two sweep threads): one at a time, process
   * wide -- the one piece of global state in the core, guarding a library
   * that has it */
  pthread_mutex_lock(&arpack_lock);
  /* ... and below 2^17 states ARPACK's BLAS calls stay on one thread: its
   * pool, woken for them, spins against the product's second thread (2^16
   * states: 0.28 s against 0.34 s); above, the Gram-Schmidt passes over
   * n x ncv are long enough to gain from the pool (2^18: 2.4 s against
   * 2.8 s) */
  int bt = n <= ((size_t)1 << 17) ? lvsi_blas_threads() : 0;
  if (bt > 1) {
    lvsi_set_blas_threads(1);
    lvsi_blas_pool_stop(); /* its idle threads spin for a while otherwise */
  }
  st = a->cplx ? run_complex(&j, w, z) : run_real(&j, w, z);
  if (bt > 1) { /* restoring starts the pool, whose idle threads spin: stop it
                  again (the next threaded BLAS call restarts it) */
    lvsi_set_blas_threads(bt);
    lvsi_blas_pool_stop();
  }
  pthread_mutex_unlock(&arpack_lock);
  if (o && o->stats) {
    o->stats->krylov_sectors++;
    o->stats->products += j.products;
    o->stats->restarts += j.restarts;
  }
  if (!st) {
    /* dseupd's order depends on the mode and on rvec: make it ascending */
    for (size_t k = 1; k < count; k++)
      for (size_t m = k; m > 0 && w[m - 1] > w[m]; m--) {
        double t = w[m];
        w[m] = w[m - 1];
        w[m - 1] = t;
        if (z) {
          size_t len = n * (a->cplx ? 2 : 1);
          for (size_t i = 0; i < len; i++) {
            double u = z[len * m + i];
            z[len * m + i] = z[len * (m - 1) + i];
            z[len * (m - 1) + i] = u;
          }
        }
      }
  }
  lvsi_splu_free(j.lu);
  symop_clear(ctx, &j.mv);
  return st;
}

/* The lowest m levels of a plain sparse Hermitian op, m large enough that
 * the run of levels within dtol of each other that holds level `top` ends
 * inside them, with the next level known (m doubles until it does): E[0..m)
 * ascending, E[m..n) = INFINITY, *pv the n x m vectors as complex values
 * (owned by the caller), *pm = m. For the series and the effective
 * Hamiltonian of a large sparse H0 (series.c, effective.c). */
int lvsi_lowest_levels(const lvs_matrix *h, size_t top, double dtol, double *E, double complex **pv, size_t *pm) {
  lvs_ctx *ctx = h->ctx;
  size_t n = h->rows, m = top + 2;
  for (;;) {
    if (m + 2 > n) m = n - 2;
    lvs_matrix *U = NULL;
    lvs_eigen_opts o = {0};
    int st = lvs_eigen_ex(h, NULL, m, 1, &o, E, &U);
    if (st) return st;
    size_t g1 = top + 1;
    while (g1 < m && E[g1] - E[g1 - 1] <= dtol) g1++;
    if (g1 < m || m >= n - 2) {
      double complex *P = lvsi_malloc(ctx, n * m * sizeof *P);
      if (!P) {
        lvs_matrix_free(U);
        return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for %zu level vectors", m);
      }
      for (size_t q = 0; q < n * m; q++) P[q] = U->cplx ? CMPLX(U->a[2 * q], U->a[2 * q + 1]) : U->a[q];
      lvs_matrix_free(U);
      for (size_t i = m; i < n; i++) E[i] = INFINITY;
      *pv = P;
      if (pm) *pm = m;
      return LVS_OK;
    }
    lvs_matrix_free(U);
    m *= 2; /* the run goes past the levels found: ask for more */
  }
}

/* whether a few low levels of h (up to 0-based `top`) go by the Krylov
 * route rather than a dense eigensolve: sparse storage, more than 1000
 * states (below, the dense routes are robust for any clustering and fast
 * enough), and room for ARPACK's basis past top */
int lvsi_krylov_pays(const lvs_matrix *h, size_t top) {
  return h->sparse && !h->vis && h->rows > 1000 && (top + 8) * 8 <= h->rows;
}

/* series.c -- Rayleigh-Schroedinger perturbation series to any order, with
 * degenerate groups lifted in C.
 *
 * Method (see METHODS.md sections 1-2):
 *   - H0 is brought to its eigenbasis (left alone, and V left sparse, when it
 *     is already diagonal; the basis is then only permuted to ascending E).
 *   - Levels are grouped by a relative tolerance on the sorted E0.
 *   - For each group P the Bloch wave operator is built order by order
 *     (Bloch, Nucl. Phys. 6, 329 (1958)):
 *       (E_P - E_m) Omega(k)_ma = (V Omega(k-1))_ma - sum_{i=1..k-1} (Omega(i) W(k-i))_ma,
 *       W(k) = P V Omega(k-1).
 *     For a single level this is the RS recursion in intermediate
 *     normalization (Hirschfelder, Byers Brown, Epstein, Adv. Quantum Chem.
 *     1, 255 (1964)): E(k) = W(k), psi(k) = Omega(k).
 *   - Cost. Each Omega(k) is stored only on the row range it can reach: a
 *     sparse V applied to a vector supported on rows [lo, hi) reaches the
 *     union of its columns' row ranges. Per order a level costs one sparse
 *     product over that range plus O(k * range); with a diagonal H0 nothing
 *     is dense and nothing is O(dim^2) (the range never exceeds dim, so the
 *     worst case is one product with V plus O(K * dim) per order).
 *   - For a degenerate group the eigenvalue series of the d x d matrix
 *     series M(lambda) = W(1) + lambda W(2) + ... is found recursively: M(0)
 *     is diagonalized, its eigenvalues grouped again, and each subgroup gets
 *     its own (small, dense) Bloch reduction with M(1), M(2), ... as a
 *     polynomial perturbation. A member's split order is the order at which
 *     its subgroup became a single level. The same recursion gives each
 *     member's P-space vector z(lambda) (the eigenvector of the Bloch
 *     effective Hamiltonian), so its state is Omega(lambda) z(lambda),
 *     brought to intermediate normalization <z(0)|psi(k)> = 0 (k >= 1) by a
 *     series division. A member split at order s has states to order K - s
 *     (the P-space part of psi(k) needs W(k + s)).
 *   - States are assembled on request (lvs_series_state), not stored.
 *   - Short paths, exact for any model: when V maps a group into itself,
 *     Omega(1) vanishes and is not stored (W(1) = P V P written directly);
 *     an all-zero Omega(k) gets an empty row range; when M(1..) are all
 *     exactly zero and only energies are wanted, a group costs the
 *     eigenvalues of M(0) alone, found sector by sector when M(0)'s nonzero
 *     pattern splits into several connected components.
 */
#include <cblas.h>
#include <complex.h>
#include <float.h>
#include <lapacke.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

typedef double complex dc;

/* OpenBLAS thread control (lazyla.c). The dense work
 * of a small degenerate group (an eigendecomposition and a few products of
 * order d <= SERIES_BLAS1_MAX) runs on one BLAS thread: waking the pool
 * costs more than it brings there (bench/jobs/degenerate.lua, d = 252, and
 * dense groups of 128..600 levels, measured on 2 shared cores:
 * docs/benchmarks.md). The previous setting is restored afterwards. */
#define SERIES_BLAS1_MAX 512
static int blas_hold1(size_t d) {
  if (d < 2 || d > SERIES_BLAS1_MAX) return 0;
  int t = lvsi_blas_threads();
  if (t > 1) lvsi_set_blas_threads(1);
  return t > 1 ? t : 0;
}
static void blas_release(int t) {
  if (t > 0) lvsi_set_blas_threads(t);
}

/* Omega of one group: per order k = 0..nom a block of rows [lo[k], hi[k]) x d */
typedef struct {
  size_t g0, d;
  double ep;
  int nom;
  size_t *lo, *hi;
  dc **om;
  dc *zbuf; /* members' z series: member i at zbuf + i (K) d, or (K+1) for d = 1 */
  int direct; /* om[k] (k = 0..nom) are the states psi(k) themselves, in the original basis */
} sgroup;

/* one computed level */
typedef struct {
  double *e;    /* corrections E(0..K) */
  int split;    /* order that split the level from its group (0: alone, -1: never) */
  int zord;     /* highest state order available */
  size_t group; /* group index of the level (all groups of H0, ascending) */
  size_t gi;    /* index into grp */
  double mind;  /* smallest |E_a - E_m| to levels outside the group (its model space, when it has one) */
  size_t nb;    /* nearest exact group left outside within the joining window (first level), or SIZE_MAX */
  double nbgap, nbkap; /* its gap and coupling kappa (mspace.c); nbkap NaN: not computed */
  const dc *z;  /* (zord+1) vectors of length d (its group's P space), in its group's zbuf */
} slevel;

/* Memory is kept proportional to what was asked for: fresh pages are what
 * a small problem pays for most. */
struct lvs_series {
  lvs_ctx *ctx;
  size_t n;       /* dimension */
  int K;          /* order */
  int normalized;
  int states;     /* state corrections kept */
  double *e0;     /* sorted unperturbed energies, n */
  int *slot;      /* per level: index into lev, or -1 when not computed */
  slevel *lev;
  size_t nlev;
  sgroup *grp;
  size_t ngrp;
  size_t *perm;   /* working index -> original basis index (diagonal H0) */
  lvs_matrix *U;  /* eigenvectors of H0 (NULL when H0 is diagonal or the levels are solved for) */
  const char *solver; /* how the orders were solved: "diagonal", "eigenbasis", "bordered dense",
                         "bordered LU", "MINRES" (the last two: the sparse path) */
  size_t solves;  /* sparse path: resolvent solves; MINRES iterations in `iters` */
  size_t iters;
  double vnorm;   /* max column 1-norm of V */
  double spacing; /* median gap of H0's known levels above rounding (0: none) */
  lvsi_mspace *ms; /* model spaces of nearly degenerate levels (mspace.c) */
  size_t nms;
  int *msof;      /* per level: its model space, or -1 */
  double lambda_max, near_factor;
  int gmode;      /* LVS_GROUPS_* */
  char note[512]; /* why no model space was formed where one was looked for ("" none) */
};

/* ---- V in the working (sorted eigen-) basis ---------------------------- */
typedef struct {
  size_t n;
  int sparse, borrowed;          /* borrowed: cp, ri, ra/za belong to the plain copy of V */
  size_t *cp, *cmin, *cmax;      /* CSC; cmin/cmax: row range of a column (cmin > cmax if empty) */
  uint32_t *ri;                  /* rows (32-bit, as the matrices store them) */
  double *ra;                    /* real sparse values */
  dc *za;                        /* complex sparse values */
  double *rd;                    /* dense real, n x n */
  dc *zd;                        /* dense complex, n x n */
  /* matrix-free U^H V U (few columns, few orders): U, V dense, real (ur, vr) or complex */
  int mf;
  const double *ur, *vr;
  dc *uz, *vz;                   /* complex copies (owned) when not both real */
  dc *t1, *t2;                   /* scratch, n each */
} wop;

static void wop_free(lvs_ctx *ctx, wop *w) {
  if (!w->borrowed) {
    lvsi_free(ctx, w->cp);
    lvsi_free(ctx, w->ri);
    lvsi_free(ctx, w->ra);
    lvsi_free(ctx, w->za);
  }
  lvsi_free(ctx, w->cmin);
  lvsi_free(ctx, w->cmax);
  lvsi_free(ctx, w->rd);
  lvsi_free(ctx, w->zd);
  lvsi_free(ctx, w->uz);
  lvsi_free(ctx, w->vz);
  lvsi_free(ctx, w->t1);
  lvsi_free(ctx, w->t2);
}

/* rows reached by V from columns [lo, hi) */
static void wop_range(const wop *w, size_t lo, size_t hi, size_t *ylo, size_t *yhi) {
  if (!w->sparse) {
    *ylo = 0;
    *yhi = lo < hi ? w->n : 0;
    return;
  }
  size_t a = SIZE_MAX, b = 0;
  for (size_t j = lo; j < hi; j++)
    if (w->cmin[j] <= w->cmax[j]) {
      if (w->cmin[j] < a) a = w->cmin[j];
      if (w->cmax[j] + 1 > b) b = w->cmax[j] + 1;
    }
  if (a == SIZE_MAX) a = b = 0;
  *ylo = a;
  *yhi = b;
}

/* y[i - ylo] = (V x)_i for i in [ylo, yhi); x[j - lo] holds the entries on [lo, hi).
 * y must span the range from wop_range and be zeroed. */
static void wop_apply(const wop *w, const dc *x, size_t lo, size_t hi, dc *y, size_t ylo) {
  if (lo >= hi) return;
  if (w->mf) { /* y = U^H (V (U x)); x is on [lo, hi) */
    int n = (int)w->n, kk = (int)(hi - lo);
    if (w->ur) { /* real U and V on the interleaved parts: (2 x n) products */
      cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, 2, n, kk, 1.0, (const double *)x, 2, w->ur + lo * w->n, n,
                  0.0, (double *)w->t1, 2);
      cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, 2, n, n, 1.0, (const double *)w->t1, 2, w->vr, n, 0.0,
                  (double *)w->t2, 2);
      cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, 2, n, n, 1.0, (const double *)w->t2, 2, w->ur, n, 1.0,
                  (double *)y, 2);
    } else {
      dc one = 1.0, zero = 0.0;
      cblas_zgemv(CblasColMajor, CblasNoTrans, n, kk, &one, w->uz + lo * w->n, n, x, 1, &zero, w->t1, 1);
      cblas_zgemv(CblasColMajor, CblasNoTrans, n, n, &one, w->vz, n, w->t1, 1, &zero, w->t2, 1);
      cblas_zgemv(CblasColMajor, CblasConjTrans, n, n, &one, w->uz, n, w->t2, 1, &one, y, 1);
    }
    return;
  }
  if (w->sparse && w->ra) {
    for (size_t j = lo; j < hi; j++) {
      dc xj = x[j - lo];
      if (xj == 0) continue;
      for (size_t k = w->cp[j]; k < w->cp[j + 1]; k++) y[w->ri[k] - ylo] += w->ra[k] * xj;
    }
  } else if (w->sparse) {
    for (size_t j = lo; j < hi; j++) {
      dc xj = x[j - lo];
      if (xj == 0) continue;
      for (size_t k = w->cp[j]; k < w->cp[j + 1]; k++) y[w->ri[k] - ylo] += w->za[k] * xj;
    }
  } else if (w->rd) {
    /* real V times a complex vector: (2 x n) = (2 x kk) (n x kk)^T on the interleaved parts */
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, 2, (int)w->n, (int)(hi - lo), 1.0, (const double *)x, 2,
                w->rd + lo * w->n, (int)w->n, 1.0, (double *)y, 2);
  } else {
    dc one = 1.0;
    cblas_zgemv(CblasColMajor, CblasNoTrans, (int)w->n, (int)(hi - lo), &one, w->zd + lo * w->n, (int)w->n, x, 1,
                &one, y, 1);
  }
}

/* C = alpha op(A) B + beta C for complex column-major blocks; when real is
 * set the imaginary parts are known to vanish and dgemm does the work. */
static int gemm(lvs_ctx *ctx, int real, int conjA, size_t m, size_t nn, size_t kk, double alpha, const dc *A,
                size_t lda, const dc *B, size_t ldb, double beta, dc *C, size_t ldc) {
  if (!m || !nn) return LVS_OK;
  if (!real) {
    dc al = alpha, be = beta;
    cblas_zgemm(CblasColMajor, conjA ? CblasConjTrans : CblasNoTrans, CblasNoTrans, (int)m, (int)nn, (int)kk, &al, A,
                (int)lda, B, (int)ldb, &be, C, (int)ldc);
    return LVS_OK;
  }
  size_t ar = conjA ? kk : m, ac = conjA ? m : kk;
  double *a = lvsi_malloc(ctx, (ar * ac + kk * nn + m * nn + 1) * sizeof *a);
  if (!a) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  double *b = a + ar * ac, *c = b + kk * nn;
  for (size_t j = 0; j < ac; j++)
    for (size_t i = 0; i < ar; i++) a[i + j * ar] = creal(A[i + j * lda]);
  for (size_t j = 0; j < nn; j++)
    for (size_t i = 0; i < kk; i++) b[i + j * kk] = creal(B[i + j * ldb]);
  for (size_t j = 0; j < nn; j++)
    for (size_t i = 0; i < m; i++) c[i + j * m] = beta != 0 ? creal(C[i + j * ldc]) : 0.0;
  cblas_dgemm(CblasColMajor, conjA ? CblasTrans : CblasNoTrans, CblasNoTrans, (int)m, (int)nn, (int)kk, alpha, a,
              (int)ar, b, (int)kk, beta, c, (int)m);
  for (size_t j = 0; j < nn; j++)
    for (size_t i = 0; i < m; i++) C[i + j * ldc] = c[i + j * m];
  lvsi_free(ctx, a);
  return LVS_OK;
}

/* ---- Bloch reduction of the whole problem onto one group -------------- */
/* Fills g->om[1..nom] (om[0] is the identity on P, not stored) and W(k)
 * (d x d, column-major) at W + (k-1) d^2, k = 1..K. Omega(k) is written in
 * place: its row range is known before V is applied. */
/* column a of the identity on P (d > 1: x0 is the caller's scratch of d) */
static const dc *bg_unit(dc *x0, size_t d, size_t a) {
  static const dc one1 = 1.0;
  if (d == 1) return &one1;
  if (a) x0[a - 1] = 0;
  x0[a] = 1.0;
  return x0;
}

/* rows [lo, hi) that Omega(k) occupies: V Omega(k-1)'s rows [ylo, yhi)
 * joined with every earlier Omega(i)'s (P's rows alone when only W(k) is
 * wanted) */
static void bg_rows(const sgroup *g, int k, int last, size_t ylo, size_t yhi, size_t *plo, size_t *phi) {
  size_t lo = ylo, hi = yhi;
  if (last) {
    lo = g->g0, hi = g->g0 + g->d;
  } else {
    if (lo >= hi) lo = SIZE_MAX, hi = 0;
    for (int i = 1; i < k; i++)
      if (g->lo[i] < g->hi[i]) {
        if (g->lo[i] < lo) lo = g->lo[i];
        if (g->hi[i] > hi) hi = g->hi[i];
      }
    if (lo >= hi) lo = hi = g->g0;
  }
  *plo = lo, *phi = hi;
}

/* ok (on x d, rows [lo, lo + on)) = V Omega(k-1); a product's rows outside
 * the block go through the scratch column tmp (clip) */
static void bg_product(const wop *V, const sgroup *g, int k, dc *x0, dc *tmp, int clip, size_t ylo, size_t yhi,
                       size_t lo, size_t on, dc *ok) {
  size_t d = g->d, plo = g->lo[k - 1], phi = g->hi[k - 1], pn = phi - plo;
  for (size_t a = 0; a < d; a++) {
    const dc *x = k == 1 ? bg_unit(x0, d, a) : g->om[k - 1] + a * pn;
    if (!clip) {
      wop_apply(V, x, plo, phi, ok + a * on + (ylo - lo), ylo);
    } else {
      memset(tmp, 0, (yhi - ylo) * sizeof *tmp);
      wop_apply(V, x, plo, phi, tmp, ylo);
      for (size_t r = lo; r < lo + on; r++)
        if (r >= ylo && r < yhi) ok[a * on + (r - lo)] = tmp[r - ylo];
    }
  }
}

/* Omega(k) from ok = V Omega(k-1): minus sum_i Omega(i) W(k-i), divided by
 * E_P - E_m off P and zero on P; an all-zero result gets an empty row range */
static void bg_resolve(sgroup *g, int k, const dc *W, const double *E, dc *ok, size_t lo, size_t on) {
  size_t d = g->d, g0 = g->g0, g1 = g0 + d, dd = d * d;
  for (int i = 1; i < k; i++) {
    size_t il = g->lo[i], in = g->hi[i] - il;
    if (!in) continue;
    const dc *oi = g->om[i], *wk = W + (size_t)(k - i - 1) * dd;
    if (d == 1) {
      dc c = wk[0];
      dc *dst = ok + (il - lo);
      for (size_t r = 0; r < in; r++) dst[r] -= oi[r] * c;
    } else {
      dc mone = -1.0, one = 1.0;
      cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)in, (int)d, (int)d, &mone, oi, (int)in, wk, (int)d,
                  &one, ok + (il - lo), (int)on);
    }
  }
  for (size_t r = 0; r < on; r++) {
    size_t m = lo + r;
    if (m >= g0 && m < g1) {
      for (size_t a = 0; a < d; a++) ok[r + a * on] = 0.0;
    } else {
      double den = g->ep - E[m];
      for (size_t a = 0; a < d; a++) ok[r + a * on] /= den;
    }
  }
  size_t nz = 0;
  while (nz < on * d && ok[nz] == 0) nz++;
  if (nz == on * d) g->hi[k] = g->lo[k];
}

static int bloch_group(lvs_ctx *ctx, const wop *V, const double *E, sgroup *g, int K, dc *W) {
  size_t d = g->d, g0 = g->g0, g1 = g0 + d, dd = d * d;
  int st = LVS_OK;
  g->lo[0] = g0;
  g->hi[0] = g1;
  dc *x0 = NULL, *tmp = NULL;
  if (d > 1) { /* columns of the identity on P, for the first product */
    x0 = lvsi_calloc(ctx, d, sizeof *x0);
    if (!x0) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  }
  for (int k = 1; k <= K && !st; k++) {
    if ((st = lvsi_fence(ctx, "perturb"))) break;
    size_t plo = g->lo[k - 1], phi = g->hi[k - 1], ylo, yhi, lo, hi;
    wop_range(V, plo, phi, &ylo, &yhi);
    dc *Wk = W + (size_t)(k - 1) * dd;
    int last = k > g->nom; /* only W(k) is wanted: P rows of V Omega(k-1) */
    /* Omega(k-1) identically zero (V does not leave P, e.g. a conserved
     * quantity): W(k) = P V Omega(k-1) = 0, and W is zeroed already */
    if (last && k > 1 && plo >= phi) continue;
    bg_rows(g, k, last, ylo, yhi, &lo, &hi);
    if (!last && k == 1 && lo >= g0 && hi <= g1) {
      if (ylo >= yhi) ylo = yhi = g0; /* V has no entries in these columns */
      /* V maps P into P: Omega(1) (zero on P) vanishes, and W(1) = P V P is
       * the product itself, written straight into W(1) */
      for (size_t a = 0; a < d; a++) wop_apply(V, bg_unit(x0, d, a), plo, phi, Wk + a * d + (ylo - g0), ylo);
      g->om[k] = NULL;
      g->lo[k] = g->hi[k] = g0;
      continue;
    }
    size_t on = hi - lo;
    /* y = V Omega(k-1) lands in the block at rows [lo, hi); a product's rows
     * outside that block go through a scratch column (last order only) */
    int clip = ylo < lo || yhi > hi;
    dc *ok = lvsi_calloc(ctx, on * d + 1, sizeof(dc));
    if (clip && !tmp) tmp = lvsi_malloc(ctx, (V->n + 1) * sizeof *tmp);
    if (!ok || (clip && !tmp)) {
      lvsi_free(ctx, ok);
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (group of %zu levels, order %d)", d, K);
      break;
    }
    bg_product(V, g, k, x0, tmp, clip, ylo, yhi, lo, on, ok);
    for (size_t a = 0; a < d; a++)
      for (size_t b = 0; b < d; b++) {
        size_t r = g0 + b;
        Wk[b + a * d] = (r >= lo && r < hi) ? ok[r - lo + a * on] : 0.0;
      }
    if (last) {
      lvsi_free(ctx, ok);
      continue;
    }
    g->om[k] = ok;
    g->lo[k] = lo;
    g->hi[k] = hi;
    bg_resolve(g, k, W, E, ok, lo, on);
  }
  lvsi_free(ctx, x0);
  lvsi_free(ctx, tmp);
  return st;
}

/* ---- eigenvalues of M(0) sector by sector ----------------------------- */
static size_t uf_find(size_t *par, size_t i) {
  while (par[i] != i) i = par[i] = par[par[i]];
  return i;
}
static int cmp_dbl(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}
/* When the nonzero pattern of M0 (d x d, column-major) has more than one
 * connected component, the ascending eigenvalues of its Hermitian part go to
 * m (*done = 1), each component solved alone in rc (real) or c (complex),
 * scratch of d*d. One component: nothing is done (*done = 0). */
static int sector_eigvals(lvs_ctx *ctx, size_t d, const dc *M0, int real, double *rc, dc *c, double *m, int *done) {
  *done = 0;
  size_t *par = lvsi_malloc(ctx, 4 * d * sizeof *par);
  if (!par) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  size_t *idx = par + d, *start = par + 2 * d, *root = par + 3 * d, ncomp = d;
  for (size_t i = 0; i < d; i++) par[i] = i;
  for (size_t j = 0; j < d && ncomp > 1; j++)
    for (size_t i = j + 1; i < d; i++)
      if (M0[j * d + i] != 0 || M0[i * d + j] != 0) {
        size_t a = uf_find(par, i), b = uf_find(par, j);
        if (a != b) par[a] = b, ncomp--;
      }
  int st = LVS_OK;
  if (ncomp > 1) {
    /* states grouped by root: counting sort on the root index */
    for (size_t i = 0; i < d; i++) start[i] = 0, root[i] = uf_find(par, i);
    for (size_t i = 0; i < d; i++) start[root[i]]++;
    size_t acc = 0;
    for (size_t r = 0; r < d; r++) {
      size_t cnt = start[r];
      start[r] = acc;
      acc += cnt;
    }
    for (size_t i = 0; i < d; i++) idx[start[root[i]]++] = i;
    size_t b0 = 0;
    while (b0 < d && !st) {
      size_t r = root[idx[b0]], b1 = b0;
      while (b1 < d && root[idx[b1]] == r) b1++;
      size_t n = b1 - b0;
      const size_t *ix = idx + b0;
      if (real) {
        for (size_t q = 0; q < n; q++)
          for (size_t p = 0; p < n; p++)
            rc[q * n + p] = 0.5 * creal(M0[ix[q] * d + ix[p]] + M0[ix[p] * d + ix[q]]);
        if (LAPACKE_dsyevd(LAPACK_COL_MAJOR, 'N', 'L', (lapack_int)n, rc, (lapack_int)n, m + b0))
          st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: dsyevd failed on a degenerate group");
      } else {
        for (size_t q = 0; q < n; q++)
          for (size_t p = 0; p < n; p++) c[q * n + p] = 0.5 * (M0[ix[q] * d + ix[p]] + conj(M0[ix[p] * d + ix[q]]));
        if (LAPACKE_zheevd(LAPACK_COL_MAJOR, 'N', 'L', (lapack_int)n, (lapack_complex_double *)c, (lapack_int)n, m + b0))
          st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: zheevd failed on a degenerate group");
      }
      b0 = b1;
    }
    if (!st) {
      qsort(m, d, sizeof *m, cmp_dbl);
      *done = 1;
    }
  }
  lvsi_free(ctx, par);
  return st;
}

/* ---- eigenvalue series of a small matrix series ----------------------- */
/* M: Kp+1 blocks d x d (column-major), d >= 2. Per member i (ascending):
 * mu[i*(Kp+1)+k], split[i], zord[i] and the eigenvector series
 * z[(i*(Kp+1)+k)*d + l], k = 0..zord[i]. ord0 is the energy order that M[0]
 * stands for. Phases: es_alloc, es_m0 (diagonalize M(0)), es_rotate
 * (R(k) = C^H M(k) C), es_subgroups (equal eigenvalues of M(0)), es_bloch
 * (one Bloch reduction for all subgroups), es_recurse (each subgroup's own
 * eigseries, and the vectors u_k), then z_k = C u_k. */
typedef struct {
  lvs_ctx *ctx;
  size_t d, dd, nk;
  int Kp, real, hizero, eonly, lastblocks, needom;
  const dc *M;
  dc *c, *R, *T, *OM, *WA, *UU;
  double *m, *rc, *mean, atol;
  size_t *sg, kb;
} eswork;

#define RB(e, k) ((e)->R + (size_t)((k) - 1) * (e)->dd)
#define OMB(e, k) ((e)->OM + (size_t)((k) - 1) * (e)->dd)
#define WAB(e, k) ((e)->WA + (size_t)((k) - 1) * (e)->dd)

static void es_free(eswork *e) {
  lvs_ctx *ctx = e->ctx;
  lvsi_free(ctx, e->c), lvsi_free(ctx, e->m), lvsi_free(ctx, e->rc), lvsi_free(ctx, e->R), lvsi_free(ctx, e->T);
  lvsi_free(ctx, e->OM), lvsi_free(ctx, e->WA), lvsi_free(ctx, e->UU), lvsi_free(ctx, e->sg), lvsi_free(ctx, e->mean);
}

/* the shape of the work and its arrays (z == NULL: eigenvalues only) */
static int es_alloc(eswork *e, int has_z) {
  lvs_ctx *ctx = e->ctx;
  size_t d = e->d, dd = e->dd, nk = e->nk;
  int Kp = e->Kp;
  e->real = 1;
  for (size_t q = 0; q < nk * dd && e->real; q++)
    if (cimag(e->M[q]) != 0) e->real = 0;
  /* M(1..Kp) all exactly zero (nothing beyond first order couples the
   * group, e.g. V conserves a quantity that labels it): the eigenvalues of
   * M(0) are the whole series, and without eigenvector series they are all
   * that is wanted: no eigenvectors, no products, no sub-reductions */
  e->hizero = 1;
  for (size_t q = dd; q < nk * dd && e->hizero; q++)
    if (e->M[q] != 0) e->hizero = 0;
  e->eonly = !has_z && e->hizero;
  /* eonly: a real M(0) needs rc alone (fresh pages are what small problems pay for) */
  size_t cb = e->eonly && e->real ? 1 : dd;
  e->c = lvsi_malloc(ctx, cb * sizeof *e->c);
  e->m = lvsi_malloc(ctx, d * sizeof *e->m);
  e->rc = lvsi_malloc(ctx, (e->real ? dd : 1) * sizeof *e->rc);
  /* R, OM, WA hold orders 1..Kp (block k at k-1): R(0) = diag(m), OM(0) = 1 */
  e->kb = Kp > 0 && !e->eonly ? (size_t)Kp : 0;
  /* T and OM serve the orders below Kp and the eigenvectors only */
  e->needom = !e->eonly && (has_z || Kp > 1);
  e->R = lvsi_malloc(ctx, (e->kb * dd + 1) * sizeof *e->R);
  e->T = lvsi_malloc(ctx, (e->needom ? dd : 1) * sizeof *e->T);
  e->OM = lvsi_malloc(ctx, (e->needom ? e->kb * dd + 1 : 1) * sizeof *e->OM);
  e->WA = lvsi_malloc(ctx, (e->kb * dd + 1) * sizeof *e->WA);
  e->UU = Kp > 0 && has_z ? lvsi_calloc(ctx, nk * dd, sizeof *e->UU) : lvsi_malloc(ctx, sizeof *e->UU);
  e->sg = lvsi_malloc(ctx, d * sizeof *e->sg);
  e->mean = lvsi_malloc(ctx, d * sizeof *e->mean);
  if (!e->c || !e->m || !e->rc || !e->R || !e->T || !e->OM || !e->WA || !e->UU || !e->sg || !e->mean)
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  e->lastblocks = !has_z && Kp > 0;
  return LVS_OK;
}

/* eigenvalues m (ascending) and vectors c of the Hermitian part of M(0) */
static int es_m0(eswork *e) {
  lvs_ctx *ctx = e->ctx;
  size_t d = e->d, dd = e->dd;
  const dc *M = e->M;
  char jobz = e->eonly ? 'N' : 'V';
  /* eigenvalues only and M(0) block-diagonal up to a permutation (V
   * conserves a quantity inside the group): one small eigenvalue problem per
   * connected component of M(0)'s nonzero pattern, then sorted together */
  int split_done = 0, st;
  if (e->eonly && d > 2 && (st = sector_eigvals(ctx, d, M, e->real, e->rc, e->c, e->m, &split_done))) return st;
  /* Hermitian part of M[0] (exactly Hermitian at the first two levels) */
  if (split_done) return LVS_OK;
  if (e->real) {
    for (size_t j = 0; j < d; j++)
      for (size_t i = 0; i < d; i++) e->rc[j * d + i] = 0.5 * creal(M[j * d + i] + M[i * d + j]);
    if (LAPACKE_dsyevd(LAPACK_COL_MAJOR, jobz, 'L', (lapack_int)d, e->rc, (lapack_int)d, e->m))
      return lvsi_fail(ctx, LVS_ELAPACK, "perturb: dsyevd failed on a degenerate group");
    if (!e->eonly)
      for (size_t q = 0; q < dd; q++) e->c[q] = e->rc[q];
    return LVS_OK;
  }
  for (size_t j = 0; j < d; j++)
    for (size_t i = 0; i < d; i++) e->c[j * d + i] = 0.5 * (M[j * d + i] + conj(M[i * d + j]));
  if (LAPACKE_zheevd(LAPACK_COL_MAJOR, jobz, 'L', (lapack_int)d, (lapack_complex_double *)e->c, (lapack_int)d, e->m))
    return lvsi_fail(ctx, LVS_ELAPACK, "perturb: zheevd failed on a degenerate group");
  return LVS_OK;
}

/* R(k) = C^H M[k] C; eigenvalues only: the last order needs just the
 * subgroups' diagonal blocks of R(Kp), so RB(Kp) keeps M[Kp] C and the
 * blocks come later */
static int es_rotate(eswork *e) {
  size_t d = e->d, dd = e->dd;
  int st;
  for (int k = 1; k <= e->Kp && !e->eonly; k++) {
    if (e->hizero) { /* C^H 0 C */
      memset(RB(e, k), 0, dd * sizeof(dc));
      continue;
    }
    if (k == e->Kp && e->lastblocks)
      return gemm(e->ctx, e->real, 0, d, d, d, 1.0, e->M + (size_t)k * dd, d, e->c, d, 0.0, RB(e, k), d);
    if ((st = gemm(e->ctx, e->real, 0, d, d, d, 1.0, e->M + (size_t)k * dd, d, e->c, d, 0.0, e->T, d))) return st;
    if ((st = gemm(e->ctx, e->real, 1, d, d, d, 1.0, e->c, d, e->T, d, 0.0, RB(e, k), d))) return st;
  }
  return LVS_OK;
}

/* subgroups of equal eigenvalues of M(0): sg[i], their means. Two
 * eigenvalues are equal when they differ by no more than tol times M(0)'s
 * own scale (its eigenvalues, spread and entries) plus noise, the absolute
 * rounding level of M(0)'s entries that the caller knows. Only M(0) sets
 * the scale: the higher orders have other units (V^(k+1) / gap^k), and
 * letting them in made the tolerance grow with the order until distinct
 * first-order values merged (V large against the gaps, high order). */
static void es_subgroups(eswork *e, double tol, double noise) {
  size_t d = e->d, dd = e->dd;
  const double *m = e->m;
  double scale = 0;
  for (size_t i = 0; i < d; i++) scale = fmax(scale, fabs(m[i]));
  scale = fmax(scale, m[d - 1] - m[0]);
  double ms = 0;
  for (size_t q = 0; q < dd; q++) ms = fmax(ms, cabs(e->M[q]));
  e->atol = tol * fmax(scale, ms) + noise;
  size_t ng = 0;
  for (size_t g0 = 0; g0 < d;) {
    size_t g1 = g0 + 1;
    while (g1 < d && m[g1] - m[g1 - 1] <= e->atol) g1++;
    double sum = 0;
    for (size_t i = g0; i < g1; i++) sum += m[i] / (double)(g1 - g0);
    e->mean[ng] = sum;
    for (size_t i = g0; i < g1; i++) e->sg[i] = ng;
    ng++;
    g0 = g1;
  }
}

/* one Bloch reduction for all subgroups at once: OM[k] (d x d) holds each
 * subgroup's wave operator in its own columns, WA[k] is block diagonal */
static int es_bloch(eswork *e) {
  size_t d = e->d, dd = e->dd;
  const size_t *sg = e->sg;
  int st;
  for (int k = 1; k <= e->Kp; k++) {
    dc *Y = e->T;
    if (k == e->Kp && e->lastblocks) { /* W(Kp) blocks: C_g^H (M C)_g + sum_j R(j)_g. OM(Kp-j)_.g */
      dc *Wk = WAB(e, k);
      memset(Wk, 0, dd * sizeof *Wk);
      for (size_t g0 = 0; g0 < d;) {
        size_t g1 = g0 + 1;
        while (g1 < d && sg[g1] == sg[g0]) g1++;
        size_t gd = g1 - g0, off = g0 * d + g0;
        if ((st = gemm(e->ctx, e->real, 1, gd, gd, d, 1.0, e->c + g0 * d, d, RB(e, k) + g0 * d, d, 0.0, Wk + off, d)))
          return st;
        for (int j = 1; j < k; j++)
          if ((st = gemm(e->ctx, e->real, 0, gd, gd, d, 1.0, RB(e, j) + g0, d, OMB(e, k - j) + g0 * d, d, 1.0,
                         Wk + off, d)))
            return st;
        g0 = g1;
      }
      return LVS_OK;
    }
    memcpy(Y, RB(e, k), dd * sizeof *Y);
    for (int j = 1; j < k; j++)
      if ((st = gemm(e->ctx, e->real, 0, d, d, d, 1.0, RB(e, j), d, OMB(e, k - j), d, 1.0, Y, d))) return st;
    dc *Wk = WAB(e, k), *Ok = OMB(e, k);
    for (size_t a = 0; a < d; a++)
      for (size_t r = 0; r < d; r++) Wk[a * d + r] = sg[r] == sg[a] ? Y[a * d + r] : 0.0;
    for (int i = 1; i < k; i++)
      if ((st = gemm(e->ctx, e->real, 0, d, d, d, -1.0, OMB(e, i), d, WAB(e, k - i), d, 1.0, Y, d))) return st;
    for (size_t a = 0; a < d; a++)
      for (size_t r = 0; r < d; r++)
        Ok[a * d + r] = sg[r] == sg[a] ? 0.0 : Y[a * d + r] / (e->mean[sg[a]] - e->m[r]);
  }
  return LVS_OK;
}

static int eigseries(lvs_ctx *ctx, size_t d, int Kp, const dc *M, double tol, double noise, int ord0, double *mu,
                     dc *z, int *split, int *zord);

/* rounding level of a subgroup's M(0) = its block of W(1) = C^H M(1) C:
 * the products' own rounding, plus M(1) times the error of C's subspaces,
 * which is M(0)'s noise over the smallest gap between its subgroups
 * (Davis & Kahan, SIAM J. Numer. Anal. 7, 1 (1970): the sin-theta bound) */
static double es_child_noise(const eswork *e, double noise) {
  size_t d = e->d, dd = e->dd;
  double m1 = 0, gap = INFINITY;
  for (size_t q = 0; q < dd; q++) m1 = fmax(m1, cabs(e->M[dd + q]));
  for (size_t i = 1; i < d; i++)
    if (e->sg[i] != e->sg[i - 1]) gap = fmin(gap, e->m[i] - e->m[i - 1]);
  double sub = isfinite(gap) && gap > 0 ? fmin(1.0, noise / gap) : 0.0;
  return 16.0 * (double)(d + 1) * DBL_EPSILON * m1 + m1 * sub;
}

/* per subgroup: energies, split orders and u_k (eigenvector series in the
 * basis of M(0)'s eigenvectors), UU[k] column i; a subgroup of several
 * members runs its own eigseries on its block of WA */
static int es_recurse(eswork *e, double tol, double noise, int ord0, double *mu, int has_z, int *split, int *zord) {
  lvs_ctx *ctx = e->ctx;
  size_t d = e->d, dd = e->dd, nk = e->nk;
  int Kp = e->Kp, st = LVS_OK;
  const size_t *sg = e->sg;
  double *smu = NULL;
  dc *sM = NULL, *sz = NULL;
  int *ss = NULL, *szo = NULL;
  for (size_t g0 = 0; g0 < d && !st;) {
    size_t g1 = g0 + 1;
    while (g1 < d && sg[g1] == sg[g0]) g1++;
    size_t gd = g1 - g0;
    if (gd == 1) {
      mu[g0 * nk] = e->m[g0];
      for (int k = 1; k <= Kp; k++) mu[g0 * nk + (size_t)k] = creal(WAB(e, k)[g0 * d + g0]);
      split[g0] = ord0;
      zord[g0] = Kp;
      if (has_z) {
        e->UU[g0 * d + g0] = 1.0;
        for (int k = 1; k <= Kp; k++) memcpy(e->UU + (size_t)k * dd + g0 * d, OMB(e, k) + g0 * d, d * sizeof(dc));
      }
      g0 = g1;
      continue;
    }
    size_t gg = gd * gd, sk = (size_t)Kp;
    sM = lvsi_malloc(ctx, sk * gg * sizeof *sM);
    smu = lvsi_malloc(ctx, gd * sk * sizeof *smu);
    sz = has_z ? lvsi_malloc(ctx, gd * sk * gd * sizeof *sz) : NULL;
    ss = lvsi_malloc(ctx, gd * sizeof *ss);
    szo = lvsi_malloc(ctx, gd * sizeof *szo);
    if (!sM || !smu || (has_z && !sz) || !ss || !szo) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      break;
    }
    for (int k = 1; k <= Kp; k++)
      for (size_t b = 0; b < gd; b++)
        for (size_t a = 0; a < gd; a++) sM[(size_t)(k - 1) * gg + b * gd + a] = WAB(e, k)[(g0 + b) * d + g0 + a];
    if ((st = eigseries(ctx, gd, Kp - 1, sM, tol, es_child_noise(e, noise), ord0 + 1, smu, sz, ss, szo))) break;
    for (size_t i = 0; i < gd; i++) {
      size_t a = g0 + i;
      mu[a * nk] = e->mean[sg[g0]];
      for (int k = 1; k <= Kp; k++) mu[a * nk + (size_t)k] = smu[i * sk + (size_t)(k - 1)];
      split[a] = ss[i];
      zord[a] = szo[i];
      /* u_k = sum_j OM[k-j][:, g0..g1) phi_j */
      for (int k = 0; has_z && k <= szo[i]; k++) {
        dc *u = e->UU + (size_t)k * dd + a * d;
        for (size_t b = 0; b < gd; b++) u[g0 + b] += sz[(i * sk + (size_t)k) * gd + b]; /* OM(0) phi_k */
        for (int j = 0; j < k; j++) {
          const dc *phi = sz + (i * sk + (size_t)j) * gd, *O = OMB(e, k - j);
          for (size_t b = 0; b < gd; b++) {
            dc p = phi[b];
            if (p == 0) continue;
            const dc *col = O + (g0 + b) * d;
            for (size_t r = 0; r < d; r++) u[r] += col[r] * p;
          }
        }
      }
    }
    lvsi_free(ctx, sM), lvsi_free(ctx, smu), lvsi_free(ctx, sz), lvsi_free(ctx, ss), lvsi_free(ctx, szo);
    sM = NULL, smu = NULL, sz = NULL, ss = NULL, szo = NULL;
    g0 = g1;
  }
  lvsi_free(ctx, sM), lvsi_free(ctx, smu), lvsi_free(ctx, sz), lvsi_free(ctx, ss), lvsi_free(ctx, szo);
  return st;
}

static int eigseries(lvs_ctx *ctx, size_t d, int Kp, const dc *M, double tol, double noise, int ord0, double *mu,
                     dc *z, int *split, int *zord) {
  /* z == NULL: eigenvalues only (no eigenvector series) */
  eswork e;
  memset(&e, 0, sizeof e);
  e.ctx = ctx;
  e.d = d;
  e.dd = d * d;
  e.nk = (size_t)Kp + 1;
  e.Kp = Kp;
  e.M = M;
  int st = es_alloc(&e, z != NULL);
  if (!st) st = es_m0(&e);
  if (!st) st = es_rotate(&e);
  if (st) goto done;
  es_subgroups(&e, tol, noise);
  size_t nk = e.nk;
  if (Kp == 0 || e.eonly) { /* eonly: higher orders all vanish, nothing splits later */
    for (size_t i = 0; i < d; i++) {
      int alone = (i == 0 || e.sg[i - 1] != e.sg[i]) && (i + 1 == d || e.sg[i + 1] != e.sg[i]);
      mu[i * nk] = alone ? e.m[i] : e.mean[e.sg[i]];
      for (size_t k = 1; k < nk; k++) mu[i * nk + k] = 0.0;
      split[i] = alone ? ord0 : -1;
      zord[i] = 0;
      if (z)
        for (size_t l = 0; l < d; l++) z[i * d + l] = e.c[i * d + l];
    }
    goto done;
  }
  if ((st = es_bloch(&e)) || (st = es_recurse(&e, tol, noise, ord0, mu, z != NULL, split, zord))) goto done;
  /* z_k = C u_k */
  for (int k = 0; z && k <= Kp; k++) {
    if ((st = gemm(ctx, e.real, 0, d, d, d, 1.0, e.c, d, e.UU + (size_t)k * e.dd, d, 0.0, e.T, d))) goto done;
    for (size_t i = 0; i < d; i++) memcpy(z + (i * nk + (size_t)k) * d, e.T + i * d, d * sizeof(dc));
  }
done:
  es_free(&e);
  return st;
}
#undef RB
#undef OMB
#undef WAB

/* ---- a few levels of a dense real H0 without diagonalizing it ---------- */
/* Method (METHODS.md sec. 1 (b); Dalgarno & Lewis, Proc. R. Soc. A 233, 70
 * (1955)): with E_n and |n> from a tridiagonal reduction (dsytrd, then
 * dsterf for every eigenvalue, dstebz + dstein + dormtr for |n> only), each
 * order solves (E_n - H0) psi(k) = V psi(k-1) - sum_{j=1..k} E(j) psi(k-j)
 * with psi(k) orthogonal to |n> through the bordered symmetric system
 * [[E_n - H0, n], [n^T, 0]] (nonsingular for a non-degenerate level),
 * factored once by Bunch-Kaufman (dsytrf; Bunch & Kaufman, Math. Comp. 31,
 * 163 (1977)) and solved by dsytrs per order. Cost: 4/3 n^3 + n^3/3 per
 * level instead of a full eigendecomposition and two n^3 products. */
typedef struct {
  size_t n;
  double *a, *d, *e, *tau; /* dsytrd output */
} tri;

static void tri_free(lvs_ctx *ctx, tri *t) {
  lvsi_free(ctx, t->a), lvsi_free(ctx, t->d), lvsi_free(ctx, t->e), lvsi_free(ctx, t->tau);
  memset(t, 0, sizeof *t);
}

/* all eigenvalues of the real symmetric plain h, ascending, into E */
static int tri_new(lvs_ctx *ctx, const lvs_matrix *h, double *E, tri *t) {
  size_t n = h->rows;
  int st = lvsi_dense_ok(ctx, n, n, sizeof(double), "perturb (H0)");
  if (st) return st;
  /* the tridiagonal reduction: 4n^3/3 flops (Golub & Van Loan 2013, 8.3) */
  if ((st = lvsi_fence_cost(ctx, 4.0 / 3.0 * (double)n * (double)n * (double)n, "perturb (reducing H0)"))) return st;
  t->n = n;
  t->a = lvsi_malloc(ctx, n * n * sizeof *t->a);
  t->d = lvsi_malloc(ctx, n * sizeof *t->d);
  t->e = lvsi_malloc(ctx, (n + 1) * sizeof *t->e);
  t->tau = lvsi_malloc(ctx, (n + 1) * sizeof *t->tau);
  double *ee = lvsi_malloc(ctx, (n + 1) * sizeof *ee);
  if (!t->a || !t->d || !t->e || !t->tau || !ee) {
    lvsi_free(ctx, ee);
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  }
  if (!h->sparse)
    memcpy(t->a, h->a, n * n * sizeof *t->a);
  else
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) t->a[i + j * n] = creal(lvsi_mat_at(h, i, j));
  lapack_int info = LAPACKE_dsytrd(LAPACK_COL_MAJOR, 'L', (lapack_int)n, t->a, (lapack_int)n, t->d, t->e, t->tau);
  if (!info) {
    t->e[n ? n - 1 : 0] = 0; /* LAPACKE's NaN checks of dstein read n entries */
    memcpy(E, t->d, n * sizeof *E);
    memcpy(ee, t->e, (n ? n - 1 : 0) * sizeof *ee);
    info = LAPACKE_dsterf((lapack_int)n, E, ee);
  }
  lvsi_free(ctx, ee);
  if (info) return lvsi_fail(ctx, LVS_ELAPACK, "perturb: tridiagonal eigenvalues failed (info %d)", (int)info);
  return LVS_OK;
}

static int bordered_level(lvs_ctx *ctx, const tri *t, const lvs_matrix *hp, const lvs_matrix *vp, const double *E,
                          size_t L, int K, sgroup *g, dc *W) {
  size_t n = t->n, n1 = n + 1;
  int st = lvsi_dense_ok(ctx, n1, n1, sizeof(double), "perturb (bordered system)");
  if (st) return st;
  lapack_int *ib = lvsi_malloc(ctx, 2 * n * sizeof *ib), *ipiv = lvsi_malloc(ctx, n1 * sizeof *ipiv);
  double *z = lvsi_malloc(ctx, n * sizeof *z), *B = lvsi_malloc(ctx, n1 * n1 * sizeof *B);
  double *r = lvsi_malloc(ctx, 2 * n1 * sizeof *r);
  double *w = lvsi_calloc(ctx, n, sizeof *w); /* LAPACKE's NaN check of dstein reads n entries of w */
  dc *y = lvsi_malloc(ctx, n * sizeof *y);
  if (!ib || !ipiv || !z || !B || !r || !y || !w) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto done;
  }
  lapack_int m = 0, nsplit = 0, ifail = 0;
  lapack_int info = LAPACKE_dstebz('I', 'B', (lapack_int)n, 0, 0, (lapack_int)L + 1, (lapack_int)L + 1, 0.0, t->d, t->e,
                                   &m, &nsplit, w, ib, ib + n);
  if (!info && m == 1)
    info = LAPACKE_dstein(LAPACK_COL_MAJOR, (lapack_int)n, t->d, t->e, 1, w, ib, ib + n, z, (lapack_int)n, &ifail);
  if (!info && m == 1)
    info = LAPACKE_dormtr(LAPACK_COL_MAJOR, 'L', 'L', 'N', (lapack_int)n, 1, t->a, (lapack_int)n, t->tau, z,
                          (lapack_int)n);
  if (info || m != 1) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: eigenvector of level %zu failed (info %d)", L + 1, (int)info);
    goto done;
  }
  /* B = [[E_L - H0, z], [z^T, 0]] (lower triangle is what dsytrf reads) */
  for (size_t j = 0; j < n; j++) {
    for (size_t i = j; i < n; i++)
      B[i + j * n1] = -(hp->sparse ? creal(lvsi_mat_at(hp, i, j)) : hp->a[i + j * n]);
    B[j + j * n1] += E[L];
    B[n + j * n1] = z[j];
  }
  B[n + n * n1] = 0;
  info = LAPACKE_dsytrf(LAPACK_COL_MAJOR, 'L', (lapack_int)n1, B, (lapack_int)n1, ipiv);
  if (info) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: bordered system of level %zu is singular (info %d)", L + 1, (int)info);
    goto done;
  }
  g->direct = 1;
  for (int k = 0; k <= g->nom; k++) {
    g->lo[k] = 0;
    g->hi[k] = n;
  }
  g->om[0] = lvsi_malloc(ctx, n * sizeof(dc));
  if (!g->om[0]) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto done;
  }
  for (size_t i = 0; i < n; i++) g->om[0][i] = z[i];
  for (int k = 1; k <= K; k++) {
    if ((st = lvsi_fence(ctx, "perturb"))) goto done;
    if ((st = lvs_matrix_apply(vp, 1, (const double *)g->om[k - 1], (double *)y))) goto done;
    double ek = 0;
    for (size_t i = 0; i < n; i++) ek += z[i] * creal(y[i]);
    W[k - 1] = ek;
    if (k > g->nom) continue;
    for (int j = 1; j < k; j++) {
      const dc *pj = g->om[k - j];
      double ej = creal(W[j - 1]);
      for (size_t i = 0; i < n; i++) y[i] -= ej * pj[i];
    }
    for (size_t i = 0; i < n; i++) {
      y[i] -= ek * z[i];
      r[i] = creal(y[i]);
      r[n1 + i] = cimag(y[i]);
    }
    r[n] = r[n1 + n] = 0;
    info = LAPACKE_dsytrs(LAPACK_COL_MAJOR, 'L', (lapack_int)n1, 2, B, (lapack_int)n1, ipiv, r, (lapack_int)n1);
    if (info) {
      st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: bordered solve failed (info %d)", (int)info);
      goto done;
    }
    dc *pk = g->om[k] = lvsi_malloc(ctx, n * sizeof(dc));
    if (!pk) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      goto done;
    }
    for (size_t i = 0; i < n; i++) pk[i] = CMPLX(r[i], r[n1 + i]);
  }
done:
  lvsi_free(ctx, ib), lvsi_free(ctx, ipiv), lvsi_free(ctx, z), lvsi_free(ctx, B), lvsi_free(ctx, r), lvsi_free(ctx, y);
  lvsi_free(ctx, w);
  return st;
}

/* ---- a few levels of a large sparse H0 (krylov.c, resolvent.c) -------- */
/* Method: the lowest levels of H0 and their vectors from the Krylov path
 * (lvs_eigen_ex: ARPACK per symmetry sector); then, per group P (n x d
 * vectors, energy E_P), the Bloch recursion in the original basis,
 *   W(k) = P^H V Omega(k-1),
 *   Omega(k) = R [V Omega(k-1) - sum_{i=1..k-1} Omega(i) W(k-i)],
 * with Omega(0) = P and R = Q (E_P - H0)^{-1} Q the reduced resolvent
 * (resolvent.c: the bordered system [[E_P - H0, P], [P^H, 0]] by one sparse
 * LU reused for every order, or MINRES on Q (H0 - E_P) Q when the LU would
 * fill in). This is the eigenbasis recursion of bloch_group with the
 * division by (E_P - E_m) replaced by R; W feeds the same eigseries. Cost per
 * order: d products with V and d solves; memory O(n d K). */

/* the sparse path applies: sparse, large, and a few explicit low levels */
static int sparse_path(const lvs_matrix *hp, const size_t *levels, size_t nlevels) {
  size_t top = 0;
  for (size_t i = 0; i < nlevels; i++) top = levels[i] > top ? levels[i] : top;
  return nlevels > 0 && lvsi_krylov_pays(hp, top);
}

/* The lowest m levels, m large enough that the group of the highest wanted
 * level ends inside them with its next level known: E[0..m) set, the rest
 * INFINITY; *pv gets the n x m vectors. gtol on the known range (the
 * Gershgorin range of H0 stands in for the unknown top of the spectrum). */
static int sparse_levels(const lvs_matrix *hp, size_t top, double degen_tol, double *E, dc **pv, double *pgtol) {
  double lo, hi;
  lvsi_gershgorin(hp, &lo, &hi);
  *pgtol = degen_tol * fmax(hi - lo, fmax(fabs(lo), fabs(hi)));
  return lvsi_lowest_levels(hp, top, *pgtol, E, pv, NULL);
}

/* Wigner's 2n+1 rule for one level when only energies are wanted: psi(0..m),
 * m = ceil((K-1)/2), by the recursion; E(k) for k <= m+1 directly
 * (<psi0|V|psi(k-1)>) and above from
 *   E(2p+1) = <psi_p|V|psi_p> - sum_{k,l=1..p} E(2p+1-k-l) <psi_k|psi_l>,
 *   E(2p)   = <psi_{p-1}|V|psi_p> - sum_{k=1..p, l=1..p-1} E(2p-k-l) <psi_k|psi_l>
 * (E. P. Wigner, Math. Naturwiss. Anz. Ungar. Akad. Wiss. 53, 477 (1935);
 * J. O. Hirschfelder, W. Byers Brown, S. T. Epstein, Adv. Quantum Chem. 1,
 * 255 (1964), sec. 5) -- half the solves of the plain recursion.
 * vpsi[j] = V psi(j) (n each, j = 0..m), psi[j] = om[j]. */
static void wigner_energies(size_t n, int K, int m, dc *const *psi, dc *const *vpsi, dc *W) {
  double S[64][64]; /* <psi_k|psi_l>, k, l <= m <= 50 */
  for (int k = 1; k <= m; k++)
    for (int l = 1; l <= m; l++) {
      dc c = 0;
      for (size_t r = 0; r < n; r++) c += conj(psi[k][r]) * psi[l][r];
      S[k][l] = creal(c);
    }
  for (int e = m + 2; e <= K; e++) {
    int p = e / 2;
    dc c = 0;
    const dc *a = e % 2 ? psi[p] : psi[p - 1];
    for (size_t r = 0; r < n; r++) c += conj(a[r]) * vpsi[p][r];
    double v = creal(c);
    int lmax = e % 2 ? p : p - 1;
    for (int k = 1; k <= p; k++)
      for (int l = 1; l <= lmax; l++) {
        int q = e - k - l;
        if (q >= 1) v -= creal(W[q - 1]) * S[k][l];
      }
    W[e - 1] = v;
  }
}

static int bloch_sparse(lvs_ctx *ctx, const lvs_matrix *hp, const lvs_matrix *vp, const dc *P, sgroup *g, int K,
                        dc *W, int wigner, const char **solver, size_t *solves, size_t *iters) {
  size_t n = hp->rows, d = g->d, dd = d * d;
  /* 2n+1: stop the states at m and keep every V psi(j) */
  int m = wigner && d == 1 && K >= 3 && K <= 101 ? K / 2 : -1;
  dc **vpsi = NULL;
  if (m > 0) {
    if (!(vpsi = lvsi_calloc(ctx, (size_t)m + 1, sizeof *vpsi))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    g->nom = m;
  }
  g->direct = 1;
  for (int k = 0; k <= g->nom; k++) g->lo[k] = 0, g->hi[k] = n;
  int st = LVS_OK;
  lvsi_resolvent *R = NULL;
  dc *y = lvsi_malloc(ctx, n * sizeof *y);
  if (!y || !(g->om[0] = lvsi_malloc(ctx, n * d * sizeof(dc)))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto done;
  }
  memcpy(g->om[0], P, n * d * sizeof(dc));
  if (g->nom >= 1 && (st = lvsi_resolvent_new(hp, g->om[0], d, g->ep, 1, &R))) goto done;
  for (int k = 1; k <= K; k++) {
    if ((st = lvsi_fence(ctx, "perturb"))) goto done;
    dc *Wk = W + (size_t)(k - 1) * dd;
    int keep = k <= g->nom;
    if (keep && !(g->om[k] = lvsi_malloc(ctx, n * d * sizeof(dc)))) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (group of %zu levels, order %d)", d, K);
      goto done;
    }
    if (m > 0 && k > m + 1) break; /* the rest by the 2n+1 rule */
    for (size_t a = 0; a < d; a++) {
      if ((st = lvs_matrix_apply(vp, 1, (const double *)(g->om[k - 1] + a * n), (double *)y))) goto done;
      if (m > 0) { /* keep V psi(k-1) */
        if (!(vpsi[k - 1] = lvsi_malloc(ctx, n * sizeof(dc)))) {
          st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
          goto done;
        }
        memcpy(vpsi[k - 1], y, n * sizeof(dc));
      }
      for (size_t b = 0; b < d; b++) {
        const dc *pb = g->om[0] + b * n;
        dc c = 0;
        for (size_t i = 0; i < n; i++) c += conj(pb[i]) * y[i];
        Wk[b + a * d] = c;
      }
      if (!keep) continue;
      /* the right-hand side from the same product: it needs W of the
       * lower orders only */
      for (int i = 1; i < k; i++) {
        const dc *oi = g->om[i], *wk = W + (size_t)(k - i - 1) * dd;
        for (size_t b = 0; b < d; b++) {
          dc c = wk[b + a * d];
          if (c == 0) continue;
          for (size_t r = 0; r < n; r++) y[r] -= oi[r + b * n] * c;
        }
      }
      if ((st = lvsi_resolvent_solve(R, y, g->om[k] + a * n))) goto done;
      (*solves)++;
    }
  }
  if (m > 0) wigner_energies(n, K, m, g->om, vpsi, W);
done:
  if (vpsi) {
    for (int j = 0; j <= m; j++) lvsi_free(ctx, vpsi[j]);
    lvsi_free(ctx, vpsi);
  }
  if (R) {
    *solver = lvsi_resolvent_method(R);
    *iters += lvsi_resolvent_iterations(R);
  }
  lvsi_resolvent_free(R);
  lvsi_free(ctx, y);
  return st;
}

/* ---- public API ------------------------------------------------------- */
void lvs_series_free(lvs_series *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  for (size_t i = 0; i < s->nlev; i++) lvsi_free(ctx, s->lev[i].e);
  for (size_t g = 0; g < s->ngrp; g++) {
    sgroup *gr = &s->grp[g];
    if (gr->om)
      for (int k = 0; k <= gr->nom; k++) lvsi_free(ctx, gr->om[k]);
    lvsi_free(ctx, gr->om);
    lvsi_free(ctx, gr->zbuf);
    lvsi_free(ctx, gr->lo);
    lvsi_free(ctx, gr->hi);
  }
  lvsi_free(ctx, s->grp);
  lvsi_free(ctx, s->lev);
  for (size_t i = 0; i < s->nms; i++) lvsi_mspace_clear(ctx, &s->ms[i]);
  lvsi_free(ctx, s->ms);
  lvsi_free(ctx, s->msof);
  lvsi_free(ctx, s->slot);
  lvsi_free(ctx, s->e0);
  lvsi_free(ctx, s->perm);
  lvs_matrix_free(s->U);
  lvsi_free(ctx, s);
}

static double colnorm1(const lvs_matrix *v) {
  double best = 0;
  for (size_t j = 0; j < v->cols; j++) {
    double sum = 0;
    if (v->sparse) {
      for (size_t k = v->cp[j]; k < v->cp[j + 1]; k++)
        sum += v->cplx ? hypot(v->a[2 * k], v->a[2 * k + 1]) : fabs(v->a[k]);
    } else if (v->cplx) {
      for (size_t i = 0; i < v->rows; i++) sum += hypot(v->a[2 * (i + j * v->rows)], v->a[2 * (i + j * v->rows) + 1]);
    } else {
      for (size_t i = 0; i < v->rows; i++) sum += fabs(v->a[i + j * v->rows]);
    }
    if (sum > best) best = sum;
  }
  return best;
}

typedef struct {
  double e;
  size_t i;
} ekey;
static int cmp_ekey(const void *a, const void *b) {
  const ekey *x = a, *y = b;
  if (x->e < y->e) return -1;
  if (x->e > y->e) return 1;
  return (x->i > y->i) - (x->i < y->i);
}

/* entry (i, j) of a plain matrix as complex */
static dc plain_at(const lvs_matrix *m, size_t i, size_t j) { return lvsi_mat_at(m, i, j); }

/* Is the plain matrix h diagonal? Then its diagonal goes to diagv. */
static int plain_diagonal(const lvs_matrix *h, double *diagv) {
  size_t n = h->rows;
  if (h->sparse) {
    for (size_t i = 0; i < n; i++) diagv[i] = 0;
    for (size_t j = 0; j < n; j++)
      for (size_t k = h->cp[j]; k < h->cp[j + 1]; k++) {
        double re = h->a[h->cplx ? 2 * k : k], im = h->cplx ? h->a[2 * k + 1] : 0.0;
        if (h->ri[k] == j)
          diagv[j] = re;
        else if (re != 0 || im != 0)
          return 0;
      }
    return 1;
  }
  for (size_t j = 0; j < n; j++) {
    for (size_t i = 0; i < n; i++)
      if (i != j && plain_at(h, i, j) != 0) return 0;
    diagv[j] = creal(plain_at(h, j, j));
  }
  return 1;
}

/* working V for a diagonal H0: V permuted to ascending E (the plain copy's
 * arrays are borrowed when the order is already ascending) */
static int wop_permuted(lvs_ctx *ctx, const lvs_matrix *vp, const size_t *perm, wop *w) {
  size_t n = vp->rows;
  w->n = n;
  if (vp->sparse) {
    int ident = 1;
    for (size_t i = 0; i < n && ident; i++) ident = perm[i] == i;
    w->sparse = 1;
    w->cmin = lvsi_malloc(ctx, (n + 1) * sizeof *w->cmin);
    w->cmax = lvsi_malloc(ctx, (n + 1) * sizeof *w->cmax);
    if (!w->cmin || !w->cmax) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    if (ident) {
      w->borrowed = 1;
      w->cp = vp->cp;
      w->ri = vp->ri;
      if (vp->cplx)
        w->za = (dc *)vp->a;
      else
        w->ra = vp->a;
      for (size_t j = 0; j < n; j++) {
        size_t a = SIZE_MAX, b = 0;
        for (size_t k = vp->cp[j]; k < vp->cp[j + 1]; k++) {
          if (vp->ri[k] < a) a = vp->ri[k];
          if (vp->ri[k] > b) b = vp->ri[k];
        }
        w->cmin[j] = a;
        w->cmax[j] = a == SIZE_MAX ? 0 : b;
      }
      return LVS_OK;
    }
    size_t *inv = lvsi_malloc(ctx, n * sizeof *inv);
    w->cp = lvsi_malloc(ctx, (n + 1) * sizeof *w->cp);
    w->ri = lvsi_malloc(ctx, (vp->nnz + 1) * sizeof *w->ri);
    if (vp->cplx)
      w->za = lvsi_malloc(ctx, (vp->nnz + 1) * sizeof *w->za);
    else
      w->ra = lvsi_malloc(ctx, (vp->nnz + 1) * sizeof *w->ra);
    if (!inv || !w->cp || !w->ri || !(w->za || w->ra)) {
      lvsi_free(ctx, inv);
      return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    }
    for (size_t i = 0; i < n; i++) inv[perm[i]] = i;
    size_t q = 0;
    for (size_t j = 0; j < n; j++) {
      size_t oj = perm[j], a = SIZE_MAX, b = 0;
      w->cp[j] = q;
      for (size_t k = vp->cp[oj]; k < vp->cp[oj + 1]; k++) {
        size_t r = inv[vp->ri[k]];
        w->ri[q] = r;
        if (vp->cplx)
          w->za[q++] = CMPLX(vp->a[2 * k], vp->a[2 * k + 1]);
        else
          w->ra[q++] = vp->a[k];
        if (r < a) a = r;
        if (r > b) b = r;
      }
      w->cmin[j] = a;
      w->cmax[j] = a == SIZE_MAX ? 0 : b;
    }
    w->cp[n] = q;
    lvsi_free(ctx, inv);
    return LVS_OK;
  }
  int st = lvsi_dense_ok(ctx, n, n, vp->cplx ? 16 : 8, "perturb (V)");
  if (st) return st;
  if (vp->cplx) {
    w->zd = lvsi_malloc(ctx, n * n * sizeof *w->zd);
    if (!w->zd) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) w->zd[i + j * n] = plain_at(vp, perm[i], perm[j]);
  } else {
    w->rd = lvsi_malloc(ctx, n * n * sizeof *w->rd);
    if (!w->rd) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) w->rd[i + j * n] = vp->a[perm[i] + perm[j] * n];
  }
  return LVS_OK;
}

/* working V for a general H0: U^H V U, formed (two n^3 products) or, when
 * few columns times few orders are needed, applied as three dense
 * matrix-vector products per column and order. *vd_keep receives the
 * dense V the matrix-free form refers to. */
static int wop_rotated(lvs_ctx *ctx, const lvs_matrix *v, const lvs_matrix *U, size_t applies, wop *w,
                       lvs_matrix **vd_keep) {
  size_t n = U->rows;
  w->n = n;
  lvs_matrix *vd = NULL;
  int st = lvsi_dense_ok(ctx, n, n, 16, "perturb (V in the eigenbasis of H0)");
  if (st) return st;
  if (!v->sparse && !v->vis) {
    vd = (lvs_matrix *)v; /* already plain dense: use it as it is */
  } else if ((st = lvs_matrix_visible(v, 1, &vd))) {
    return st;
  }
  if (applies * 3 < 2 * n) {
    w->mf = 1;
    if (!vd->cplx && !U->cplx) {
      w->ur = U->a;
      w->vr = vd->a;
    } else {
      w->uz = lvsi_malloc(ctx, n * n * sizeof *w->uz);
      w->vz = lvsi_malloc(ctx, n * n * sizeof *w->vz);
      if (!w->uz || !w->vz) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      for (size_t q = 0; q < n * n; q++) {
        w->vz[q] = vd->cplx ? CMPLX(vd->a[2 * q], vd->a[2 * q + 1]) : vd->a[q];
        w->uz[q] = U->cplx ? CMPLX(U->a[2 * q], U->a[2 * q + 1]) : U->a[q];
      }
    }
    w->t1 = lvsi_malloc(ctx, n * sizeof *w->t1);
    w->t2 = lvsi_malloc(ctx, n * sizeof *w->t2);
    if (!w->t1 || !w->t2) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    if (vd != v) *vd_keep = vd;
    return LVS_OK;
  }
  if (!vd->cplx && !U->cplx) {
    double *t = lvsi_malloc(ctx, n * n * sizeof *t);
    w->rd = lvsi_malloc(ctx, n * n * sizeof *w->rd);
    if (!t || !w->rd) {
      lvsi_free(ctx, t);
      if (vd != v) lvs_matrix_free(vd);
      return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    }
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)n, (int)n, (int)n, 1.0, vd->a, (int)n, U->a, (int)n,
                0.0, t, (int)n);
    cblas_dgemm(CblasColMajor, CblasTrans, CblasNoTrans, (int)n, (int)n, (int)n, 1.0, U->a, (int)n, t, (int)n, 0.0,
                w->rd, (int)n);
    lvsi_free(ctx, t);
  } else {
    dc *vz = lvsi_malloc(ctx, n * n * sizeof *vz), *uz = lvsi_malloc(ctx, n * n * sizeof *uz),
       *t = lvsi_malloc(ctx, n * n * sizeof *t);
    w->zd = lvsi_malloc(ctx, n * n * sizeof *w->zd);
    if (!vz || !uz || !t || !w->zd) {
      lvsi_free(ctx, vz), lvsi_free(ctx, uz), lvsi_free(ctx, t);
      if (vd != v) lvs_matrix_free(vd);
      return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    }
    for (size_t q = 0; q < n * n; q++) {
      vz[q] = vd->cplx ? CMPLX(vd->a[2 * q], vd->a[2 * q + 1]) : vd->a[q];
      uz[q] = U->cplx ? CMPLX(U->a[2 * q], U->a[2 * q + 1]) : U->a[q];
    }
    dc one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)n, (int)n, (int)n, &one, vz, (int)n, uz, (int)n,
                &zero, t, (int)n);
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, (int)n, (int)n, (int)n, &one, uz, (int)n, t, (int)n,
                &zero, w->zd, (int)n);
    lvsi_free(ctx, vz), lvsi_free(ctx, uz), lvsi_free(ctx, t);
  }
  if (vd != v) lvs_matrix_free(vd);
  return LVS_OK;
}

/* ---- lvs_series_new, phase by phase ------------------------------------
 * inputs (sizes, order, levels; plain copies, Hermitian checks), basis (the
 * working basis and how orders are solved: diagonal H0 permuted, the sparse
 * path, a few bordered dense levels, or H0's eigenbasis), groups (counted,
 * then each solved and its energies and P-space vectors z found). */
typedef struct {
  lvs_ctx *ctx;
  const lvs_matrix *h0, *v;
  lvs_matrix *hp, *vp, *vkeep; /* plain H0 and V (copies when padded); V kept for the matrix-free wop */
  wop w;                       /* V in the working basis */
  tri t;                       /* bordered dense route */
  int bordered, bheld;         /* bheld: BLAS threads to restore (blas_hold1) */
  dc *pvec;                    /* sparse path: the lowest levels' vectors, n x m */
  double degen_tol;
  double gtol;                 /* degeneracy tolerance on E: spacing_tol, or sparse_levels' */
  unsigned char *want;
  dc *W, *zz;
  double *mu;
  int *sp, *zo;
  const lvs_series_opts *o;
  lvs_series *s;
  dc *cy;                      /* sparse path: scratch for a column of V (n) */
  struct nbnote { size_t g0, g1, nb; double gap, kap; } *nbn; /* neighbours left outside (mspace.c) */
  size_t nnbn, nbncap;
} sbuild;

static void sbuild_free(sbuild *b) {
  lvs_ctx *ctx = b->ctx;
  lvsi_free(ctx, b->pvec);
  blas_release(b->bheld);
  wop_free(ctx, &b->w);
  tri_free(ctx, &b->t);
  lvs_matrix_free(b->vkeep);
  if (b->hp != b->h0) lvs_matrix_free(b->hp);
  if (b->vp != b->v) lvs_matrix_free(b->vp);
  lvsi_free(ctx, b->want);
  lvsi_free(ctx, b->W);
  lvsi_free(ctx, b->mu);
  lvsi_free(ctx, b->sp);
  lvsi_free(ctx, b->zo);
  lvsi_free(ctx, b->cy);
  lvsi_free(ctx, b->nbn);
}

/* sizes, order, tolerance and levels; plain copies (sparse stays sparse),
 * whose Hermitian checks cost O(stored entries), not O(n^2) for a padded
 * sparse operator */
static int series_inputs(sbuild *b, int order, const size_t *levels, size_t nlevels) {
  lvs_ctx *ctx = b->ctx;
  const lvs_matrix *h0 = b->h0, *v = b->v;
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) return lvsi_fail(ctx, LVS_EDIM, "H0 must be square, got %zux%zu", n, lvs_matrix_cols(h0));
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "V is %zux%zu but H0 is %zux%zu", lvs_matrix_rows(v), lvs_matrix_cols(v), n, n);
  if (order < 1 || order > 1000) return lvsi_fail(ctx, LVS_ERANGE, "order must be from 1 to 1000, got %d", order);
  if (!(b->degen_tol >= 0) || b->degen_tol > 0.5)
    return lvsi_fail(ctx, LVS_EINVAL, "degen_tol must be from 0 to 0.5, got %g", b->degen_tol);
  for (size_t i = 0; i < nlevels; i++)
    if (levels[i] >= n) return lvsi_fail(ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", levels[i] + 1, n);
  int st;
  b->hp = (lvs_matrix *)h0; /* plain already: read it in place */
  if (h0->vis && (st = lvs_matrix_visible(h0, 0, &b->hp))) {
    b->hp = (lvs_matrix *)h0;
    return st;
  }
  if ((st = lvsi_check_hermitian(b->hp, LVS_DEFAULT_HERM_TOL, "H0"))) return st;
  b->vp = (lvs_matrix *)v;
  if (v->vis && (st = lvs_matrix_visible(v, 0, &b->vp))) {
    b->vp = (lvs_matrix *)v;
    return st;
  }
  return lvsi_check_hermitian(b->vp, LVS_DEFAULT_HERM_TOL, "V");
}

/* The tolerance under which adjacent unperturbed levels count as one
 * degenerate group: degen_tol times the spacing scale of the spectrum (the
 * median of its gaps above rounding), never below the rounding of the
 * energies themselves (rnd: a few ulps of their size for a diagonal H0,
 * more when H0 was diagonalized). Relative to the spacing, not to the
 * largest energy: one far level or a constant offset must not merge
 * levels that are distinct on their own scale. */
/* ulps of the largest |E| that a computed eigenvalue of an n x n H0 may be off */
#define EIG_ROUNDING(n) fmax(64.0, 4.0 * (double)(n))
static int spacing_tol(lvs_ctx *ctx, const double *E, size_t n, double degen_tol, double rnd, double *gtol,
                       double *spacing) {
  double big = 0;
  for (size_t i = 0; i < n; i++)
    if (isfinite(E[i])) big = fmax(big, fabs(E[i]));
  double floor = rnd * DBL_EPSILON * big;
  *gtol = floor;
  *spacing = 0;
  if (n < 2) return LVS_OK;
  double *g = lvsi_malloc(ctx, (n - 1) * sizeof *g);
  if (!g) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  size_t m = 0;
  for (size_t i = 1; i < n; i++)
    if (E[i] - E[i - 1] > floor && isfinite(E[i])) g[m++] = E[i] - E[i - 1];
  if (m > 0) {
    qsort(g, m, sizeof *g, cmp_dbl);
    *spacing = g[m / 2];
    *gtol = fmax(floor, degen_tol * g[m / 2]);
  }
  lvsi_free(ctx, g);
  return LVS_OK;
}

/* the working basis: s->e0 sorted, s->perm, V in that basis (b->w), or the
 * sparse path's levels and vectors, or the bordered dense route */
static int series_basis(lvs_series *s, sbuild *b, const size_t *levels, size_t nlevels) {
  lvs_ctx *ctx = s->ctx;
  size_t n = s->n;
  double *E = s->e0;
  const lvs_matrix *hp = b->hp, *vp = b->vp;
  int st;
  if (plain_diagonal(hp, E)) {
    ekey *raw = lvsi_malloc(ctx, n * sizeof *raw);
    if (!raw) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    for (size_t i = 0; i < n; i++) raw[i].e = E[i], raw[i].i = i;
    qsort(raw, n, sizeof *raw, cmp_ekey);
    for (size_t i = 0; i < n; i++) E[i] = raw[i].e, s->perm[i] = raw[i].i;
    lvsi_free(ctx, raw);
    s->solver = "diagonal";
    if ((st = spacing_tol(ctx, E, n, b->degen_tol, 4.0, &b->gtol, &s->spacing))) return st;
    return wop_permuted(ctx, vp, s->perm, &b->w);
  }
  for (size_t i = 0; i < n; i++) s->perm[i] = i;
  if (sparse_path(hp, levels, nlevels)) {
    size_t top = 0;
    for (size_t i = 0; i < nlevels; i++) top = levels[i] > top ? levels[i] : top;
    s->solver = "bordered LU";
    if ((st = sparse_levels(hp, top, b->degen_tol, E, &b->pvec, &b->gtol))) return st;
    double own; /* the spacing only: the Krylov levels keep the Gershgorin-scaled tolerance */
    return spacing_tol(ctx, E, n, b->degen_tol, 64.0, &own, &s->spacing);
  }
  /* a few explicit, non-degenerate levels of a real H0: solve, do not diagonalize */
  if (!hp->cplx && nlevels >= 1 && nlevels <= 8) {
    if ((st = tri_new(ctx, hp, E, &b->t))) return st;
    if ((st = spacing_tol(ctx, E, n, b->degen_tol, EIG_ROUNDING(n), &b->gtol, &s->spacing))) return st;
    double gt = b->gtol;
    b->bordered = b->o->groups != LVS_GROUPS_HAND;
    /* a neighbour close enough to be joined into a model space needs V in
     * the eigenbasis: no bordered route then */
    double win = b->o->groups == LVS_GROUPS_AUTO ? s->near_factor * s->lambda_max * s->vnorm : 0.0;
    if (gt > win) win = gt;
    for (size_t i = 0; i < nlevels; i++) {
      size_t L = levels[i];
      if ((L > 0 && E[L] - E[L - 1] <= win) || (L + 1 < n && E[L + 1] - E[L] <= win)) b->bordered = 0;
    }
    if (b->bordered) {
      s->solver = "bordered dense";
      return LVS_OK;
    }
    tri_free(ctx, &b->t);
  }
  if ((st = lvs_eigen(hp, 0, 1, E, &s->U))) return st;
  if ((st = spacing_tol(ctx, E, n, b->degen_tol, EIG_ROUNDING(n), &b->gtol, &s->spacing))) return st;
  /* columns to apply V to: the wanted levels' groups, counted loosely
   * (a group is found only after the eigenvalues are known) */
  size_t applies = (nlevels ? nlevels : n) * (size_t)s->K;
  return wop_rotated(ctx, vp, s->U, applies, &b->w, &b->vkeep);
}

/* energies (and P-space vectors z when states are kept) of the members of
 * one group g of size d from its W(1..K) */
static int group_energies(lvs_series *s, sbuild *b, sgroup *g) {
  lvs_ctx *ctx = s->ctx;
  size_t d = g->d, g0 = g->g0, nk = (size_t)s->K + 1, kp = (size_t)s->K;
  int K = s->K, st;
  const dc *W = b->W;
  if (d == 1) {
    slevel *L = &s->lev[s->slot[g0]];
    for (int k = 1; k <= K; k++) L->e[k] = creal(W[k - 1]);
    L->split = 0;
    L->zord = s->states ? K : -1;
    if (s->states) {
      if (!(g->zbuf = lvsi_calloc(ctx, nk, sizeof(dc)))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      g->zbuf[0] = 1.0;
      L->z = g->zbuf;
    }
  } else {
    b->mu = lvsi_malloc(ctx, d * kp * sizeof *b->mu);
    b->sp = lvsi_malloc(ctx, d * sizeof *b->sp);
    b->zo = lvsi_malloc(ctx, d * sizeof *b->zo);
    dc *zz = s->states ? (g->zbuf = lvsi_calloc(ctx, d * kp * d, sizeof *zz)) : NULL;
    if (!b->mu || !b->sp || !b->zo || (s->states && !zz)) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    double stol = b->degen_tol > 0 ? b->degen_tol : 1e-10;
    /* W(1) = P V P: rounding of V's entries and of H0's eigenvectors */
    double noise = 16.0 * (double)(d + 1) * DBL_EPSILON * s->vnorm;
    if ((st = eigseries(ctx, d, K - 1, W, stol, noise, 1, b->mu, zz, b->sp, b->zo))) return st;
    for (size_t i = 0; i < d; i++) {
      slevel *L = &s->lev[s->slot[g0 + i]];
      for (int k = 1; k <= K; k++) L->e[k] = b->mu[i * kp + (size_t)(k - 1)];
      L->split = b->sp[i];
      L->zord = s->states ? b->zo[i] : -1;
      if (s->states) L->z = zz + i * kp * d; /* owned by the group */
    }
    lvsi_free(ctx, b->mu), lvsi_free(ctx, b->sp), lvsi_free(ctx, b->zo);
    b->mu = NULL, b->sp = NULL, b->zo = NULL;
  }
  if (!s->states) /* Omega served the energies only */
    for (int k = 1; k <= g->nom; k++) {
      lvsi_free(ctx, g->om[k]);
      g->om[k] = NULL;
    }
  return LVS_OK;
}

/* one group of levels [g0, g1) of H0: its wave operator and energies */
static int series_group(lvs_series *s, sbuild *b, size_t g0, size_t g1, size_t gid) {
  lvs_ctx *ctx = s->ctx;
  size_t n = s->n, d = g1 - g0, dd = d * d, nk = (size_t)s->K + 1;
  int K = s->K, st;
  const double *E = s->e0;
  sgroup *g = &s->grp[s->ngrp++];
  g->g0 = g0;
  g->d = d;
  double ep = 0;
  for (size_t i = g0; i < g1; i++) ep += E[i] / (double)d;
  g->ep = ep;
  g->nom = d == 1 && s->states ? K : K - 1;
  g->om = lvsi_calloc(ctx, nk, sizeof *g->om);
  g->lo = lvsi_calloc(ctx, nk, sizeof *g->lo);
  g->hi = lvsi_calloc(ctx, nk, sizeof *g->hi);
  b->W = lvsi_calloc(ctx, (size_t)K * dd, sizeof *b->W);
  if (!g->om || !g->lo || !g->hi || !b->W)
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (group of %zu levels, order %d)", d, K);
  blas_release(b->bheld);
  b->bheld = blas_hold1(d);
  if (b->pvec)
    st = bloch_sparse(ctx, b->hp, b->vp, b->pvec + g0 * n, g, K, b->W, !s->states, &s->solver, &s->solves, &s->iters);
  else if (b->bordered)
    st = bordered_level(ctx, &b->t, b->hp, b->vp, E, g0, K, g, b->W);
  else
    st = bloch_group(ctx, &b->w, E, g, K, b->W);
  if (st) return st;
  /* nearest level outside the group (E is sorted) */
  double md = INFINITY;
  if (g0 > 0) md = fabs(ep - E[g0 - 1]);
  if (g1 < n) md = fmin(md, fabs(E[g1] - ep));
  for (size_t i = g0; i < g1; i++) {
    slevel *L = &s->lev[s->nlev];
    s->slot[i] = (int)s->nlev++;
    L->group = gid;
    L->gi = s->ngrp - 1;
    L->mind = md;
    if (!(L->e = lvsi_malloc(ctx, nk * sizeof *L->e))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    L->e[0] = ep;
  }
  st = group_energies(s, b, g);
  lvsi_free(ctx, b->W);
  b->W = NULL;
  return st;
}

/* the groups of the sorted E0 (within b->gtol) that hold a wanted
 * level: counted first, then solved one by one */
static int series_groups(lvs_series *s, sbuild *b) {
  lvs_ctx *ctx = s->ctx;
  size_t n = s->n;
  const double *E = s->e0;
  const unsigned char *want = b->want;
  double gtol = b->gtol;
  size_t ngneed = 0, nlneed = 0;
  for (size_t g0 = 0; g0 < n;) {
    size_t g1 = g0 + 1;
    while (g1 < n && E[g1] - E[g1 - 1] <= gtol) g1++;
    int need = 0;
    for (size_t i = g0; i < g1; i++) need |= want[i];
    if (need) ngneed++, nlneed += g1 - g0;
    g0 = g1;
  }
  s->grp = lvsi_calloc(ctx, ngneed, sizeof *s->grp);
  s->lev = lvsi_calloc(ctx, nlneed, sizeof *s->lev);
  if (!s->grp || !s->lev) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  for (size_t i = 0; i < n; i++) s->slot[i] = -1;
  size_t gid = 0;
  for (size_t g0 = 0; g0 < n; gid++) {
    size_t g1 = g0 + 1;
    while (g1 < n && E[g1] - E[g1 - 1] <= gtol) g1++;
    int need = 0;
    for (size_t i = g0; i < g1; i++) need |= want[i];
    int st = need ? series_group(s, b, g0, g1, gid) : LVS_OK;
    if (st) return st;
    g0 = g1;
  }
  return LVS_OK;
}


/* ---- model spaces of nearly degenerate levels (mspace.c) -------------- */
/* column j of V in the working basis, added to y (nk entries) */
static int series_vcol(void *u, size_t j, dc *y) {
  sbuild *b = u;
  lvs_series *s = b->s;
  if (!b->pvec) {
    static const dc one = 1.0;
    wop_apply(&b->w, &one, j, j + 1, y, 0);
    return LVS_OK;
  }
  size_t n = s->n;
  if (!b->cy && !(b->cy = lvsi_malloc(s->ctx, n * sizeof *b->cy)))
    return lvsi_fail(s->ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
  int st = lvs_matrix_apply(b->vp, 1, (const double *)(b->pvec + j * n), (double *)b->cy);
  if (st) return st;
  for (size_t i = 0; i < n && isfinite(s->e0[i]); i++) {
    const dc *p = b->pvec + i * n;
    dc c = 0;
    for (size_t r = 0; r < n; r++) c += conj(p[r]) * b->cy[r];
    y[i] += c;
  }
  return LVS_OK;
}

static void series_nbnote(void *u, size_t g0, size_t g1, size_t nb, double gap, double kap) {
  sbuild *b = u;
  if (b->nnbn == b->nbncap) {
    size_t nc = b->nbncap ? 2 * b->nbncap : 16;
    struct nbnote *q = lvsi_malloc(b->ctx, nc * sizeof *q);
    if (!q) return; /* the notes are diagnostics: without memory they stay unknown */
    if (b->nbn) memcpy(q, b->nbn, b->nnbn * sizeof *q);
    lvsi_free(b->ctx, b->nbn);
    b->nbn = q;
    b->nbncap = nc;
  }
  b->nbn[b->nnbn++] = (struct nbnote){g0, g1, nb, gap, kap};
}

/* the spaces the caller chose: each a union of exact groups, no overlaps */
static int hand_spaces(lvs_series *s, sbuild *b, const lvsi_mspace_in *in) {
  lvs_ctx *ctx = s->ctx;
  const lvs_series_opts *o = b->o;
  const double *E = in->E;
  size_t nk = in->nk, off = 0;
  if (!(s->ms = lvsi_calloc(ctx, o->nhand + 1, sizeof *s->ms))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  for (size_t h = 0; h < o->nhand; off += o->hand_len[h], h++) {
    const size_t *g = o->hand + off;
    size_t d = o->hand_len[h];
    if (d == 0) return lvsi_fail(ctx, LVS_EINVAL, "groups[%zu] is empty", h + 1);
    lvsi_mspace *m = &s->ms[s->nms];
    if (!(m->lev = lvsi_malloc(ctx, d * sizeof *m->lev))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    memcpy(m->lev, g, d * sizeof *g);
    m->d = d;
    m->hand = 1;
    s->nms++;
    for (size_t i = 1; i < d; i++) /* insertion sort: groups are small */
      for (size_t j = i; j > 0 && m->lev[j - 1] > m->lev[j]; j--) {
        size_t t = m->lev[j];
        m->lev[j] = m->lev[j - 1];
        m->lev[j - 1] = t;
      }
    for (size_t i = 0; i < d; i++) {
      size_t L = m->lev[i];
      if (L >= s->n) return lvsi_fail(ctx, LVS_ERANGE, "groups[%zu]: level %zu is out of range 1..%zu", h + 1, L + 1, s->n);
      if (L >= nk)
        return lvsi_fail(ctx, LVS_ERANGE, "groups[%zu]: level %zu is above the %zu levels found by the Krylov path", h + 1,
                         L + 1, nk);
      if (i > 0 && m->lev[i - 1] == L) return lvsi_fail(ctx, LVS_EINVAL, "groups[%zu] names level %zu twice", h + 1, L + 1);
      if (s->msof[L] >= 0)
        return lvsi_fail(ctx, LVS_EINVAL, "groups[%zu] and groups[%d] overlap (level %zu)", h + 1, s->msof[L] + 1, L + 1);
      s->msof[L] = (int)h;
    }
    /* every exact group touched must come along whole */
    for (size_t i = 0; i < d; i++) {
      size_t L = m->lev[i], g0 = L, g1 = L + 1;
      while (g0 > 0 && E[g0] - E[g0 - 1] <= in->gtol) g0--;
      while (g1 < nk && E[g1] - E[g1 - 1] <= in->gtol) g1++;
      for (size_t q = g0; q < g1; q++)
        if (s->msof[q] != (int)h)
          return lvsi_fail(ctx, LVS_EINVAL,
                           "groups[%zu] cuts the degenerate group of levels %zu..%zu: level %zu must come along", h + 1,
                           g0 + 1, g1, q + 1);
    }
    m->nsub = 0;
    for (size_t i = 0; i < d; i++)
      if (i == 0 || E[m->lev[i]] - E[m->lev[i - 1]] > in->gtol || m->lev[i] != m->lev[i - 1] + 1) m->nsub++;
    snprintf(m->why, sizeof m->why, "chosen by hand (groups[%zu])", h + 1);
  }
  return LVS_OK;
}

/* the model spaces (before the groups are solved: members become wanted) */
static int series_spaces(lvs_series *s, sbuild *b) {
  lvs_ctx *ctx = s->ctx;
  const lvs_series_opts *o = b->o;
  size_t n = s->n, nk = n;
  if (!(s->msof = lvsi_malloc(ctx, n * sizeof *s->msof))) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  for (size_t i = 0; i < n; i++) s->msof[i] = -1;
  if (b->bordered) return LVS_OK; /* no neighbour within the joining window (series_basis) */
  if (b->pvec)
    for (nk = 0; nk < n && isfinite(s->e0[nk]);) nk++;
  lvsi_mspace_in in = {nk, s->e0, b->gtol, b->want, s->lambda_max, s->near_factor, s->vnorm,
                       o->near_max ? o->near_max : 8, o->groups == LVS_GROUPS_AUTO, series_vcol, series_nbnote, b};
  int st;
  if (o->groups == LVS_GROUPS_HAND) {
    st = hand_spaces(s, b, &in);
  } else {
    st = lvsi_mspace_find(ctx, &in, &s->ms, &s->nms, s->note, sizeof s->note);
    for (size_t i = 0; i < s->nms && !st; i++)
      for (size_t q = 0; q < s->ms[i].d; q++) s->msof[s->ms[i].lev[q]] = (int)i;
  }
  for (size_t i = 0; i < s->nms && !st; i++)
    for (size_t q = 0; q < s->ms[i].d; q++) b->want[s->ms[i].lev[q]] = 1;
  return st;
}

/* each space's effective Hamiltonian (effective.c), the members' nearest
 * level outside their space, and the neighbour notes onto the levels */
static int series_space_terms(lvs_series *s, sbuild *b) {
  lvs_ctx *ctx = s->ctx;
  int st = LVS_OK;
  for (size_t i = 0; i < s->nms && !st; i++) {
    lvsi_mspace *m = &s->ms[i];
    size_t d = m->d, dd = d * d;
    int Ke = s->K < 50 ? s->K : 50;
    lvs_effective *e = NULL;
    if ((st = lvs_effective_new(b->h0, b->v, m->lev, d, Ke, &e))) break;
    m->K = Ke;
    m->real = 1;
    if (!(m->terms = lvsi_malloc(ctx, (size_t)(Ke + 1) * dd * sizeof *m->terms)))
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    for (int k = 0; k <= Ke && !st; k++) {
      lvs_matrix *t = NULL;
      if ((st = lvs_effective_term(e, k, &t))) break;
      for (size_t c = 0; c < d; c++)
        for (size_t r = 0; r < d; r++) {
          dc x = lvsi_mat_at(t, r, c);
          if (cimag(x) != 0) m->real = 0;
          m->terms[(size_t)k * dd + c * d + r] = x;
        }
      lvs_matrix_free(t);
    }
    lvs_effective_free(e);
    for (size_t q = 0; q < d && !st; q++) { /* nearest non-member */
      size_t L = m->lev[q];
      double md = INFINITY;
      for (size_t x = L; x-- > 0;) { /* below */
        if (s->msof[x] == (int)i) continue;
        md = fabs(s->e0[L] - s->e0[x]);
        break;
      }
      for (size_t x = L + 1; x < s->n; x++) {
        if (s->msof[x] == (int)i) continue;
        if (isfinite(s->e0[x])) md = fmin(md, fabs(s->e0[x] - s->e0[L]));
        break;
      }
      if (s->slot[L] >= 0) s->lev[s->slot[L]].mind = md;
    }
  }
  for (size_t i = 0; i < s->nlev; i++) s->lev[i].nb = SIZE_MAX, s->lev[i].nbgap = INFINITY, s->lev[i].nbkap = NAN;
  for (size_t q = 0; q < b->nnbn; q++) {
    const struct nbnote *nt = &b->nbn[q];
    for (size_t L = nt->g0; L < nt->g1; L++)
      if (s->slot[L] >= 0 && s->msof[L] < 0) {
        slevel *lv = &s->lev[s->slot[L]];
        lv->nb = nt->nb, lv->nbgap = nt->gap, lv->nbkap = nt->kap;
      }
  }
  return st;
}

void lvs_series_opts_init(lvs_series_opts *o) {
  memset(o, 0, sizeof *o);
  o->degen_tol = 1e-10;
  o->groups = LVS_GROUPS_AUTO;
  o->lambda_max = 1.0;
  o->near_factor = 4.0;
  o->near_max = 8;
}

static int check_opts(lvs_ctx *ctx, const lvs_series_opts *o) {
  if (!(o->lambda_max > 0) || !isfinite(o->lambda_max))
    return lvsi_fail(ctx, LVS_EINVAL, "lambda_max must be a positive finite number, got %g", o->lambda_max);
  if (!(o->near_factor >= 0) || !isfinite(o->near_factor))
    return lvsi_fail(ctx, LVS_EINVAL, "near_factor must be a finite number >= 0, got %g", o->near_factor);
  if (o->groups != LVS_GROUPS_AUTO && o->groups != LVS_GROUPS_EXACT && o->groups != LVS_GROUPS_HAND)
    return lvsi_fail(ctx, LVS_EINVAL, "groups mode %d is unknown", o->groups);
  if (o->groups == LVS_GROUPS_HAND && o->nhand && (!o->hand || !o->hand_len))
    return lvsi_fail(ctx, LVS_EINVAL, "groups chosen by hand need their members");
  return LVS_OK;
}

int lvs_series_new(const lvs_matrix *h0, const lvs_matrix *v, int order, const size_t *levels, size_t nlevels,
                   double degen_tol, int flags, lvs_series **out) {
  lvs_series_opts o;
  lvs_series_opts_init(&o);
  o.degen_tol = degen_tol;
  o.flags = flags;
  return lvs_series_new_ex(h0, v, order, levels, nlevels, &o, out);
}

int lvs_series_new_ex(const lvs_matrix *h0, const lvs_matrix *v, int order, const size_t *levels, size_t nlevels,
                      const lvs_series_opts *o, lvs_series **out) {
  lvs_ctx *ctx = h0->ctx;
  *out = NULL;
  sbuild b;
  memset(&b, 0, sizeof b);
  b.ctx = ctx;
  b.h0 = h0;
  b.v = v;
  b.o = o;
  b.degen_tol = o->degen_tol;
  int flags = o->flags;
  lvs_series *s = NULL;
  int st = check_opts(ctx, o);
  if (!st) st = series_inputs(&b, order, levels, nlevels);
  if (st) goto fail;
  size_t n = lvs_matrix_rows(h0);
  if (!(s = lvsi_calloc(ctx, 1, sizeof *s))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto fail;
  }
  b.s = s;
  s->ctx = ctx;
  s->n = n;
  s->K = order;
  s->lambda_max = o->lambda_max;
  s->near_factor = o->near_factor;
  s->gmode = o->groups;
  s->normalized = (flags & LVS_SERIES_NORMALIZED) != 0;
  s->states = (flags & LVS_SERIES_NO_STATES) == 0;
  s->e0 = lvsi_malloc(ctx, n * sizeof *s->e0);
  s->slot = lvsi_malloc(ctx, n * sizeof *s->slot);
  s->perm = lvsi_malloc(ctx, n * sizeof *s->perm);
  b.want = lvsi_calloc(ctx, n, 1);
  if (!s->e0 || !s->slot || !s->perm || !b.want) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto fail;
  }
  s->vnorm = colnorm1(b.vp);
  if ((st = series_basis(s, &b, levels, nlevels))) goto fail;
  if (nlevels == 0)
    memset(b.want, 1, n);
  else
    for (size_t i = 0; i < nlevels; i++) b.want[levels[i]] = 1;
  if ((st = series_spaces(s, &b))) goto fail;
  if ((st = series_groups(s, &b))) goto fail;
  if ((st = series_space_terms(s, &b))) goto fail;
  sbuild_free(&b);
  *out = s;
  return LVS_OK;
fail:
  sbuild_free(&b);
  lvs_series_free(s);
  return st;
}

size_t lvs_series_dim(const lvs_series *s) { return s->n; }
const char *lvs_series_solver(const lvs_series *s, size_t *solves, size_t *iters) {
  if (solves) *solves = s->solves;
  if (iters) *iters = s->iters;
  return s->solver ? s->solver : "eigenbasis";
}
int lvs_series_order(const lvs_series *s) { return s->K; }
double lvs_series_vnorm(const lvs_series *s) { return s->vnorm; }

static int lev_ok(const lvs_series *s, size_t level) {
  if (level >= s->n)
    return lvsi_fail(s->ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", level + 1, s->n);
  if (s->slot[level] < 0)
    return lvsi_fail(s->ctx, LVS_ERANGE, "level %zu was not computed (not in 'levels')", level + 1);
  return LVS_OK;
}
#define LEV(s, level) (&(s)->lev[(s)->slot[level]])

int lvs_series_has(const lvs_series *s, size_t level) { return level < s->n && s->slot[level] >= 0; }

/* The basis state (0-based) that carries the level's unperturbed state when
 * H0 is diagonal: the state itself (*pure = 1) or, for a member of a
 * degenerate group, the largest component of its zeroth-order combination
 * (*pure = 0). SIZE_MAX when H0 is not diagonal or no states were kept. */
size_t lvs_series_basis_state(const lvs_series *s, size_t level, int *pure) {
  if (pure) *pure = 0;
  if (!lvs_series_has(s, level) || s->U) return SIZE_MAX;
  const slevel *L = LEV(s, level);
  const sgroup *g = &s->grp[L->gi];
  if (g->direct) return SIZE_MAX;
  if (g->d == 1) {
    if (pure) *pure = 1;
    return s->perm[g->g0];
  }
  if (!L->z) return SIZE_MAX;
  size_t best = 0;
  int count = 0;
  for (size_t b = 0; b < g->d; b++) {
    if (cabs(L->z[b]) > 1e-12) count++;
    if (cabs(L->z[b]) > cabs(L->z[best])) best = b;
  }
  if (pure) *pure = count == 1;
  return s->perm[g->g0 + best];
}

int lvs_series_energy(const lvs_series *s, size_t level, int k, double *e) {
  int st = lev_ok(s, level);
  if (st) return st;
  if (k < 0 || k > s->K) return lvsi_fail(s->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, s->K);
  *e = LEV(s, level)->e[k];
  return LVS_OK;
}

int lvs_series_at(const lvs_series *s, size_t level, double lambda, double *e) {
  return lvs_series_at_order(s, level, lambda, s->K, e);
}

/* a member of a model space: the matching eigenvalue (members ranked by
 * ascending value) of the space's order-k effective Hamiltonian at lambda;
 * any other level: its series summed to order k */
int lvs_series_at_order(const lvs_series *s, size_t level, double lambda, int k, double *e) {
  int st = lev_ok(s, level);
  if (st) return st;
  if (k < 0 || k > s->K) return lvsi_fail(s->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, s->K);
  if (!isfinite(lambda)) return lvsi_fail(s->ctx, LVS_EINVAL, "lambda must be finite");
  int sp = s->msof ? s->msof[level] : -1;
  if (sp >= 0) {
    const lvsi_mspace *m = &s->ms[sp];
    double *w = lvsi_malloc(s->ctx, m->d * sizeof *w);
    if (!w) return lvsi_fail(s->ctx, LVS_ENOMEM, "perturb: out of memory");
    st = lvsi_mspace_eigvals(s->ctx, m, lambda, k, w);
    size_t r = 0;
    while (r < m->d && m->lev[r] != level) r++;
    if (!st) *e = w[r];
    lvsi_free(s->ctx, w);
    return st;
  }
  const double *c = LEV(s, level)->e;
  for (int j = 0; j <= k; j++) /* overflowed coefficients: say where, sum nothing */
    if (!isfinite(c[j]))
      return lvsi_fail(s->ctx, LVS_ERANGE,
                       "level %zu: coefficient E(%d) is not finite (the terms overflowed); sum to order %d at most",
                       level + 1, j, j - 1);
  double acc = 0;
  for (int j = k; j >= 0; j--) acc = acc * lambda + c[j];
  *e = acc;
  return LVS_OK;
}

size_t lvs_series_nspaces(const lvs_series *s) { return s->nms; }
int lvs_series_space_of(const lvs_series *s, size_t level) {
  return s->msof && level < s->n ? s->msof[level] : -1;
}
int lvs_series_space(const lvs_series *s, size_t i, const size_t **members, size_t *d, int *order, int *hand,
                     const char **why) {
  if (i >= s->nms) return lvsi_fail(s->ctx, LVS_ERANGE, "model space %zu is out of range 1..%zu", i + 1, s->nms);
  const lvsi_mspace *m = &s->ms[i];
  if (members) *members = m->lev;
  if (d) *d = m->d;
  if (order) *order = m->K;
  if (hand) *hand = m->hand;
  if (why) *why = m->why;
  return LVS_OK;
}
int lvs_series_space_term(const lvs_series *s, size_t i, int k, lvs_matrix **out) {
  *out = NULL;
  if (i >= s->nms) return lvsi_fail(s->ctx, LVS_ERANGE, "model space %zu is out of range 1..%zu", i + 1, s->nms);
  const lvsi_mspace *m = &s->ms[i];
  if (k < 0 || k > m->K) return lvsi_fail(s->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, m->K);
  size_t d = m->d;
  int st = lvs_matrix_new(s->ctx, d, d, !m->real, out);
  for (size_t c = 0; c < d && !st; c++)
    for (size_t r = 0; r < d && !st; r++) {
      dc x = m->terms[(size_t)k * d * d + c * d + r];
      st = lvs_matrix_set(*out, r, c, creal(x), cimag(x));
    }
  if (st) {
    lvs_matrix_free(*out);
    *out = NULL;
  }
  return st;
}
const char *lvs_series_notes(const lvs_series *s) { return s->note; }
int lvs_series_groups_mode(const lvs_series *s) { return s->gmode; }
double lvs_series_spacing(const lvs_series *s) { return s->spacing; }
void lvs_series_grouping(const lvs_series *s, double *lambda_max, double *near_factor) {
  if (lambda_max) *lambda_max = s->lambda_max;
  if (near_factor) *near_factor = s->near_factor;
}
int lvs_series_neighbour(const lvs_series *s, size_t level, size_t *nb, double *gap, double *kappa) {
  int st = lev_ok(s, level);
  if (st) return st;
  const slevel *L = LEV(s, level);
  *nb = L->nb;
  *gap = L->nbgap;
  *kappa = L->nbkap;
  return LVS_OK;
}

int lvs_series_info(const lvs_series *s, size_t level, size_t *group, int *split_order, double *min_denominator,
                    int *state_orders) {
  int st = lev_ok(s, level);
  if (st) return st;
  const slevel *L = LEV(s, level);
  if (group) *group = L->group;
  if (split_order) *split_order = L->split;
  if (min_denominator) *min_denominator = L->mind;
  if (state_orders) *state_orders = L->zord;
  return LVS_OK;
}

/* psi(k) = sum_j Omega(k-j) z_j, then intermediate normalization by series
 * division with c(lambda) = <z_0|psi(lambda)>, then (optionally) the
 * normalized state phi(k) = sum_j c_j psi(k-j), c = (1 + s)^(-1/2),
 * s_k = sum_j <psi(j)|psi(k-j)> (series power rule, Knuth, TAOCP vol. 2,
 * sec. 4.7). Cost O(k^2 dim d). */
int lvs_series_state(const lvs_series *s, size_t level, int k, double *psi) {
  int st = lev_ok(s, level);
  if (st) return st;
  lvs_ctx *ctx = s->ctx;
  const slevel *L = LEV(s, level);
  if (k < 0 || k > s->K) return lvsi_fail(ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, s->K);
  if (!s->states) return lvsi_fail(ctx, LVS_ERANGE, "no state corrections were kept (states = false)");
  if (k > L->zord)
    return lvsi_fail(ctx, LVS_ERANGE,
                     "state corrections of level %zu (split from its degenerate group at order %d) are available "
                     "to order %d only",
                     level + 1, L->split, L->zord);
  const sgroup *g = &s->grp[L->gi];
  size_t n = s->n, d = g->d, nk = (size_t)k + 1;
  const dc *z = L->z;
  dc *q = lvsi_calloc(ctx, nk * n, sizeof *q), *c = lvsi_calloc(ctx, nk, sizeof *c);
  dc *x = lvsi_calloc(ctx, n, sizeof *x);
  double *sk = lvsi_calloc(ctx, nk, sizeof *sk), *ck = lvsi_calloc(ctx, nk, sizeof *ck);
  if (!q || !c || !x || !sk || !ck) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "state: out of memory");
    goto done;
  }
  /* Omega in the original basis (om[0] = P, n x d): q_j = sum_i Omega(j-i) z_i,
   * c_j = <P z_0 | q_j> */
  for (int j = 0; j <= k && g->direct; j++) {
    dc *qj = q + (size_t)j * n;
    for (int i = 0; i <= j; i++) {
      const dc *zi = z + (size_t)i * d, *om = g->om[j - i];
      for (size_t b = 0; b < d; b++)
        if (zi[b] != 0)
          for (size_t r = 0; r < n; r++) qj[r] += om[r + b * n] * zi[b];
    }
    dc cj = 0;
    for (size_t b = 0; b < d; b++) {
      const dc *pb = g->om[0] + b * n;
      dc pq = 0;
      for (size_t r = 0; r < n; r++) pq += conj(pb[r]) * qj[r];
      cj += conj(z[b]) * pq;
    }
    c[j] = cj;
    for (int i = 1; i <= j; i++) {
      const dc *qp = q + (size_t)(j - i) * n;
      for (size_t r = 0; r < n; r++) qj[r] -= c[i] * qp[r];
    }
  }
  for (int j = 0; j <= k && !g->direct; j++) {
    dc *qj = q + (size_t)j * n;
    for (size_t b = 0; b < d; b++) qj[g->g0 + b] += z[(size_t)j * d + b]; /* Omega(0) z_j */
    for (int i = 0; i < j; i++) {
      const dc *zi = z + (size_t)i * d, *om = g->om[j - i];
      size_t lo = g->lo[j - i], on = g->hi[j - i] - lo;
      for (size_t b = 0; b < d; b++) {
        dc p = zi[b];
        if (p == 0) continue;
        for (size_t r = 0; r < on; r++) qj[lo + r] += om[r + b * on] * p;
      }
    }
    dc cj = 0;
    for (size_t b = 0; b < d; b++) cj += conj(z[b]) * qj[g->g0 + b];
    c[j] = cj;
    for (int i = 1; i <= j; i++) {
      const dc *qp = q + (size_t)(j - i) * n;
      for (size_t r = 0; r < n; r++) qj[r] -= c[i] * qp[r];
    }
  }
  const dc *res = q + (size_t)k * n;
  if (s->normalized) {
    for (int j = 1; j <= k; j++) {
      double acc = 0;
      for (int i = 0; i <= j; i++) {
        const dc *a = q + (size_t)i * n, *b = q + (size_t)(j - i) * n;
        for (size_t r = 0; r < n; r++) acc += creal(conj(a[r]) * b[r]);
      }
      sk[j] = acc;
    }
    ck[0] = 1;
    for (int j = 1; j <= k; j++) {
      double acc = 0;
      for (int i = 1; i <= j; i++) acc += ((double)i / 2.0 - (double)j) * sk[i] * ck[j - i];
      ck[j] = acc / (double)j;
    }
    for (int j = 0; j <= k; j++)
      for (size_t r = 0; r < n; r++) x[r] += ck[j] * q[(size_t)(k - j) * n + r];
    res = x;
  }
  dc *outv = (dc *)psi;
  if (g->direct) {
    memcpy(outv, res, n * sizeof *outv);
  } else if (s->U) {
    if (res != x) memcpy(x, res, n * sizeof *x);
    st = lvs_matrix_apply(s->U, 1, (const double *)x, psi);
  } else {
    for (size_t r = 0; r < n; r++) outv[s->perm[r]] = res[r];
  }
done:
  lvsi_free(ctx, q), lvsi_free(ctx, c), lvsi_free(ctx, x), lvsi_free(ctx, sk), lvsi_free(ctx, ck);
  return st;
}

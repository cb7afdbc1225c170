/* sweep.c -- levels of H(p) = H0 + p V along a uniform grid of p, tracked by
 * eigenvector overlap, with avoided and true crossings located, optional
 * perturbation-series curves, a journal that makes runs resumable, and
 * shards that split the points across processes or machines.
 *
 * Points. p_k = from + (to - from) k / steps, k = 0..steps; the lowest
 * `count` eigenpairs of H(p_k) are computed per point. Points are
 * independent, so they are computed by `threads` POSIX threads (the points
 * still to do in a block are dealt round-robin); every point runs the same
 * code on the same input, so the numbers do not depend on the thread count.
 * Each worker has its own context whose allocator is the caller's allocator
 * behind a mutex (a memory cap set by an embedding host keeps holding).
 * While points are computed, OpenBLAS is held to one thread (no
 * oversubscription, and its threaded kernels would make the rounding depend
 * on its thread count); the previous setting is restored afterwards.
 *
 * Solver. A real model whose H0 and V are banded (half-bandwidth kd, found
 * by scanning the visible blocks) with 4 kd <= n and n >= 16 uses the band
 * path: reduction to tridiagonal form without forming Q (dsbtrd, Schwarz's
 * band reduction; Kaufman, ACM TOMS 10, 73 (1984)), the lowest `count`
 * eigenvalues by bisection (dstebz; Kahan's Sturm-count bisection), and the
 * eigenvectors by inverse iteration on the band matrix itself (dgbtrf +
 * dgbtrs, three solves, Gram-Schmidt inside clusters closer than 1e-3 of
 * the 1-norm, as LAPACK's dstein does for tridiagonal ones; Wilkinson, The
 * Algebraic Eigenvalue Problem, 1965, ch. 9). With vectors the bisection
 * is our own (sturm_lowest: all midpoints counted in one pass, to 1e-10 of
 * the 1-norm, then Rayleigh-Ritz), since dstebz's one-shift-at-a-time
 * Sturm counts wait on each division (46% of the bench sweep, perf).
 * Everything else goes through lvs_eigen (dsyevr / zheevr), except:
 *
 * Krylov path. A sparse model above LVS_KRYLOV_MIN_DIM states with 8 count
 * <= n that the band path does not take (the rule: lvs_sweep_method in
 * levelshift.h; method = LVS_SWEEP_KRYLOV forces it) is never copied
 * densely: H0 and V are merged once into one CSC pattern with both value
 * arrays, each point refills a worker-owned CSC H(p) with one multiply-add
 * per entry and calls lvs_eigen_ex (sectors split per point, so p = 0 gets
 * the sectors of H0 alone; ARPACK's Lanczos per large sector, residual
 * tolerance SWEEP_KRYLOV_TOL). Warm starts: the points are cut into runs of
 * LVS_SWEEP_KRYLOV_RUN consecutive grid points (a function of the grid
 * only); a worker takes a whole run and starts each point but the run's
 * first from the sum of the previous point's raw vectors plus a little of
 * a fixed noise vector (krylov_start), so the numbers do not depend on the
 * thread count, and shards take whole runs. ARPACK is not reentrant, so
 * the solves take turns under one lock (arpack_mu): the threads overlap
 * only the work around them. Crossings on this path are refined by Brent's
 * method on the exact H(p), each solve started from the one before, and
 * stop once the gap is a true crossing's (brent_gap).
 *
 * Symmetry sectors. When the band path applies and the union sparsity of
 * H0 and V falls apart into >= 2 connected components (lvsi_components;
 * parity for an oscillator with x^2 or x^4), every H(p) is block diagonal
 * in them for all p: each point runs the band path per sector on the
 * sector's own band matrix (states in ascending order; x^4's half-bandwidth
 * 4 becomes 2 in each parity sector, so the band reduction, ~ n^2 kd, costs
 * a quarter), takes the lowest `count` of the union (ties: lower sector
 * first; bisection values first, vectors only for the chosen levels, then
 * ordered again by their Rayleigh-Ritz energies) and embeds the vectors in
 * the full space with zeros elsewhere. Tracking is unchanged: overlaps
 * between sectors are exactly zero, so crossings between sectors are
 * clean. The journal keeps full-length vectors (same format).
 *
 * Tracking (METHODS.md section 5). Between neighbouring points the overlap
 * matrix O_ij = |<u_i(k)|u_j(k+1)>| is formed and the assignment maximizing
 * sum_i O_i,pi(i) is found with the Hungarian method (Kuhn, Naval Res.
 * Logist. Q. 2, 83 (1955); Munkres, J. SIAM 5, 32 (1957)), written here in
 * its shortest-augmenting-path form with row/column potentials, O(count^3).
 * Exact degeneracies at a point (|E_a - E_b| <= 1e-10 * energy scale) leave
 * the vectors of the degenerate set arbitrary: they are replaced by the
 * projections into the set of the previous point's vectors with the largest
 * projections, orthonormalized by Gram-Schmidt, so that a level passing
 * through a true crossing keeps its character. Stored vectors get the phase
 * fix u_j <- u_j conj(o)/|o| (o = <u_i(k)|u_j(k+1)>).
 *
 * Crossings. For every pair of adjacent energies (ranks r, r+1) at the grid
 * points, each interior local minimum of the gap E_{r+1} - E_r is refined by
 * golden-section search (Kiefer, Proc. AMS 4, 502 (1953)) on the exact gap
 * of H(p) over the two neighbouring intervals. A refined gap at or below
 * 1e-9 times the energy scale of the sweep is a true crossing (kind
 * crossing), a larger one an avoided crossing (kind avoided). The levels of
 * an entry are the tracked levels holding ranks r and r+1 at the grid point
 * of the minimum. Every interior local minimum is reported, so a broad,
 * shallow minimum of a gap is listed as an avoided crossing too.
 *
 * Series. With series_order K > 0 the Rayleigh-Schroedinger series of the
 * lowest `count` levels of H0 (series.c, lambda = p) is evaluated at every
 * grid point; series level r (r-th lowest of H0) is written beside the
 * tracked level holding rank r at the grid point nearest p = 0.
 *
 * Journal and shards (design). The raw result of a point -- its energies
 * and eigenvectors exactly as the solver returned them, before tracking --
 * is all that tracking needs, and tracking is a cheap sequential pass. So a
 * point's raw result is appended as one binary record to a journal file as
 * soon as it is finished, and the file is fdatasync'd at most once every
 * SWEEP_SYNC_SECONDS (a crash loses at most that much work; a sync per
 * point made a 1501-point sweep 47x slower) and when the points are done; tracking, series and crossings always
 * run afterwards on raw results, whether they came from memory or from a
 * journal, so a resumed or merged run gives the same bytes as one run.
 *   base.part            journal of a whole run (resumed by the same call)
 *   base.part.K-of-N     part file of shard K (1-based) of N: the points
 *                        k with k mod N = K - 1 (round-robin: balanced; on
 *                        the Krylov path the runs r with r mod N = K - 1)
 * File: 48-byte header (magic "LVSWJ01\n", then n, count, points, complex
 * flag, a 64-bit FNV-1a hash of H0, V, from, to, steps and count, and of
 * the path when it is not the one AUTO takes), then
 * fixed-size records: k, count energies, the n x count vectors (real parts
 * only for a real model), and an FNV-1a check of the record. A record torn
 * by a kill fails its length or check and is cut off before appending. A
 * run (not a shard) reads its own journal and every part file of the same
 * sweep (same hash), computes what is missing (merge_only: refuses to), and
 * the crossing search re-solves H(p) between grid points, which is why a
 * merge runs the same script: the model is needed again, the points are
 * not. A file of the same name but another sweep is an error, never mixed
 * in. lvs_sweep_remove_journals deletes the files used once the caller has
 * written its final files.
 *
 * Not done yet: step refinement where overlaps drop (METHODS 5), levels
 * entering the window from above when count < dim are tracked as best the
 * overlaps allow; the smallest accepted overlap is kept (lvs_sweep_min_overlap)
 * so a caller can tell adiabatic from diabatic following.
 */
#define _GNU_SOURCE
#include <complex.h>
#include <errno.h>
#include <fcntl.h>
#include <glob.h>
#include <lapacke.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>
#include "internal.h"

#define SWEEP_MAX_STEPS 1000000
#define SWEEP_MAX_THREADS 64
/* Krylov path: ARPACK's relative residual tolerance per point (energies to
 * within tol |E|, and to ~ (tol |E|)^2 / gap away from near-degeneracy), and
 * where the golden-section search stops, relative to |to - from| (with
 * energies good to tol |E|, a quadratic gap minimum cannot be located more
 * finely than ~ sqrt(tol |E| / g'') anyway) */
#define SWEEP_KRYLOV_TOL 1e-12
#define SWEEP_KRYLOV_PTOL 1e-8
/* Krylov path: weight of the fixed noise vector in a warm start (relative
 * to the start's norm; 1e-3 cost 7% more time, 1e-6 a little less) */
#define SWEEP_KRYLOV_NOISE 1e-4


struct lvs_sweep {
  lvs_ctx *ctx;
  size_t n, count, npts;
  double from, to;
  double *e;   /* tracked energies: e[a * npts + k] */
  double *ser; /* series energies beside tracked level a, or NULL */
  int series_order;
  lvs_sweep_crossing *cross;
  size_t ncross;
  double min_overlap;
  int partial;       /* a shard: only its part file was written */
  size_t done;       /* points on disk for a shard */
  char **used;       /* journal files used (to remove), NULL-terminated */
  char *pname, *punit, *eunit;
  int method;        /* the path taken: LVS_SWEEP_DENSE, _BAND or _KRYLOV */
};

/* ---- allocator shared by worker threads ---------------------------------- */
typedef struct {
  lvs_alloc_fn f;
  void *ud;
  pthread_mutex_t mu;
} locked_alloc;

static void *locked_alloc_fn(void *ud, void *ptr, size_t osize, size_t nsize) {
  locked_alloc *la = ud;
  pthread_mutex_lock(&la->mu);
  void *r = la->f(la->ud, ptr, osize, nsize);
  pthread_mutex_unlock(&la->mu);
  return r;
}

/* ---- one point ------------------------------------------------------------ */
typedef struct {
  size_t n, count;
  int cplx;
  const double *h0, *v; /* dense visible blocks, n*n (x2 when cplx) */
  long kd;              /* half-bandwidth for the band path, -1: dense path */
  const double *hb0, *vb; /* lower band storage (kd+1) x n of H0 and V (band path) */
  lvs_sweep_family_fn family; /* H(p) from a callback (main thread only), or NULL */
  void *family_ud;
  /* symmetry sectors (band path only, nsec >= 2, else nsec = 0): sector s
   * holds the states secidx[secoff[s] .. secoff[s+1]-1], ascending */
  size_t nsec;
  const size_t *secoff, *secidx;
  const struct bandmod *sec;
  /* Krylov path (krylov != 0; h0, v and kd unused): the union pattern of
   * H0 and V in CSC (kcp, kri; knnz entries) with the values of each on
   * it (ka0, ka1; complex interleaved when cplx); krylov = 1 passes
   * LVS_EIGEN_AUTO per point, 2 LVS_EIGEN_KRYLOV (method forced) */
  int krylov;
  size_t knnz;
  const size_t *kcp, *kri;
  const double *ka0, *ka1;
} model;

/* a real banded matrix family H0 + p V in lower band storage (kd+1) x n */
typedef struct bandmod {
  size_t n, kd;
  const double *hb0, *vb;
} bandmod;

static double grid_p(double from, double to, size_t steps, size_t k) {
  if (k == steps) return to;
  return from + (to - from) * (double)k / (double)steps;
}

/* scratch of the band path, kept by a worker across its points */
typedef struct {
  double *buf;
  lapack_int *ibuf;
  size_t *piv;
  double *rr; /* Rayleigh-Ritz: n x count + count x count */
  lvs_matrix *kh; /* Krylov path: H(p) on the union pattern, refilled per point */
  double *kstart; /* Krylov path: the start vector (2n) */
} band_scratch;

static size_t band_need(size_t n, size_t kd) { return 2 * (kd + 1) * n + 2 * n + 4 * n + (3 * kd + 1) * n + 2 * n; }

static int band_scratch_get(lvs_ctx *tctx, const model *md, band_scratch *bs) {
  size_t n = md->n;
  if (bs->buf) return LVS_OK;
  bs->buf = lvsi_malloc(tctx, band_need(n, (size_t)md->kd) * sizeof(double));
  bs->ibuf = lvsi_malloc(tctx, 5 * n * sizeof(lapack_int));
  bs->piv = lvsi_malloc(tctx, n * sizeof(size_t));
  bs->rr = lvsi_malloc(tctx, (n * md->count + md->count * md->count) * sizeof(double));
  if (!bs->buf || !bs->ibuf || !bs->piv || !bs->rr) return lvsi_fail(tctx, LVS_ENOMEM, "sweep: out of memory for a point");
  return LVS_OK;
}

static void band_scratch_free(lvs_ctx *tctx, band_scratch *bs) {
  lvsi_free(tctx, bs->buf);
  lvsi_free(tctx, bs->ibuf);
  lvsi_free(tctx, bs->piv);
  lvsi_free(tctx, bs->rr);
  lvs_matrix_free(bs->kh);
  lvsi_free(tctx, bs->kstart);
  bs->kh = NULL;
  bs->kstart = NULL;
  bs->rr = NULL;
  bs->buf = NULL;
  bs->ibuf = NULL;
  bs->piv = NULL;
}

/* LU with partial pivoting of a general band matrix (kl = ku = kd), LAPACK
 * dgbtf2's layout: A(i,j) at g[2kd + i - j + j*ldg], ldg = 3kd + 1. Inline
 * loops: for the small kd of a sweep the BLAS calls of dgbtf2 cost more than
 * the arithmetic. An exactly zero pivot is replaced by `tiny`. */
static void band_lu(size_t n, size_t kd, double *g, size_t *ipiv, double tiny) {
  size_t ldg = 3 * kd + 1, kv = 2 * kd, ju = 0;
  for (size_t j = 0; j < n; j++) {
    size_t km = kd < n - 1 - j ? kd : n - 1 - j, jp = 0;
    double best = fabs(g[kv + j * ldg]);
    for (size_t i = 1; i <= km; i++)
      if (fabs(g[kv + i + j * ldg]) > best) { best = fabs(g[kv + i + j * ldg]); jp = i; }
    ipiv[j] = j + jp;
    if (best == 0) g[kv + j * ldg] = tiny;
    size_t jmax = j + kd + jp < n - 1 ? j + kd + jp : n - 1;
    if (jmax > ju) ju = jmax;
    if (jp)
      for (size_t c = j; c <= ju; c++) {
        double *a = &g[kv + jp - (c - j) + c * ldg], *b = &g[kv - (c - j) + c * ldg], t = *a;
        *a = *b;
        *b = t;
      }
    double piv = g[kv + j * ldg];
    for (size_t i = 1; i <= km; i++) g[kv + i + j * ldg] /= piv;
    for (size_t c = j + 1; c <= ju; c++) {
      double u = g[kv - (c - j) + c * ldg];
      if (u != 0)
        for (size_t i = 1; i <= km; i++) g[kv + i - (c - j) + c * ldg] -= g[kv + i + j * ldg] * u;
    }
  }
}

static void band_solve(size_t n, size_t kd, const double *g, const size_t *ipiv, double *b) {
  size_t ldg = 3 * kd + 1, kv = 2 * kd;
  for (size_t j = 0; j + 1 < n; j++) {
    size_t lm = kd < n - 1 - j ? kd : n - 1 - j, l = ipiv[j];
    if (l != j) { double t = b[l]; b[l] = b[j]; b[j] = t; }
    double bj = b[j];
    for (size_t i = 1; i <= lm; i++) b[j + i] -= g[kv + i + j * ldg] * bj;
  }
  for (size_t j = n; j-- > 0;) {
    b[j] /= g[kv + j * ldg];
    double t = b[j];
    size_t top = kv < j ? kv : j;
    for (size_t i = 1; i <= top; i++) b[j - i] -= g[kv - i + j * ldg] * t;
  }
}

/* band path: lowest m eigenvalues (and vectors, n x m real, when vec):
 * dsbtrd + dstebz, to full accuracy without vectors; with vectors the
 * bisection stops at 1e-10 of the 1-norm, two inverse-iteration solves per
 * level at that shift, in the complement of the levels already found, and a
 * Rayleigh-Ritz step on the m vectors gives energies to rounding (error
 * quadratic in the vectors'; Parlett, The Symmetric Eigenvalue Problem,
 * 1980, ch. 4 and 11). Pairs ascending. */
/* H(p) in band storage into hb; returns its 1-norm (1 when zero) */
static double band_form(const bandmod *bm, double p, double *hb) {
  size_t n = bm->n, kd = bm->kd, ldab = kd + 1;
  const double *b0 = bm->hb0, *b1 = bm->vb;
  double onenrm = 0;
  for (size_t q = 0; q < ldab * n; q++) hb[q] = b0[q] + p * b1[q];
  for (size_t j = 0; j < n; j++) {
    double cs = 0;
    for (size_t r = 0; r <= kd && j + r < n; r++) cs += fabs(hb[j * ldab + r]);
    for (size_t r = 1; r <= kd && r <= j; r++) cs += fabs(hb[(j - r) * ldab + r]);
    if (cs > onenrm) onenrm = cs;
  }
  return onenrm == 0 ? 1 : onenrm;
}

/* lowest m eigenvalues of the symmetric tridiagonal (d, e) to within abstol
 * by Sturm-count bisection (Kahan's counts with LAPACK's pivmin guard, as in
 * dstebz; Wilkinson, The Algebraic Eigenvalue Problem, 1965, ch. 5), all
 * unfinished midpoints counted together in one pass over the matrix (the
 * divisions of different shifts are independent, so they overlap) and every
 * count used to narrow every interval. scr: 6n doubles, idx: n. */
static void sturm_lowest(size_t n, const double *d, const double *e, size_t m, double abstol, double *w,
                         double *scr, size_t *idx) {
  const double eps = 2.220446049250313e-16;
  double *e2 = scr, *a = e2 + n, *b = a + n, *x = b + n, *q = x + n, *c = q + n;
  double lo = d[0], hi = d[0], emax = 0;
  for (size_t i = 0; i < n; i++) {
    double r = (i ? fabs(e[i - 1]) : 0) + (i + 1 < n ? fabs(e[i]) : 0);
    if (d[i] - r < lo) lo = d[i] - r;
    if (d[i] + r > hi) hi = d[i] + r;
    if (i + 1 < n) {
      e2[i] = e[i] * e[i];
      if (e2[i] > emax) emax = e2[i];
    }
  }
  double pivmin = 2.2250738585072014e-308 * (emax > 1 ? emax : 1);
  double t = fabs(lo) > fabs(hi) ? fabs(lo) : fabs(hi);
  lo -= 2 * eps * t * (double)n + 2 * pivmin;
  hi += 2 * eps * t * (double)n + 2 * pivmin;
  for (size_t j = 0; j < m; j++) { a[j] = lo; b[j] = hi; }
  for (int round = 0; round < 256; round++) {
    size_t k = 0;
    for (size_t j = 0; j < m; j++) {
      double big = fabs(a[j]) > fabs(b[j]) ? fabs(a[j]) : fabs(b[j]);
      double tol = abstol > 2 * eps * big ? abstol : 2 * eps * big;
      if (b[j] - a[j] > tol) { idx[k] = j; x[k] = 0.5 * (a[j] + b[j]); k++; }
    }
    if (!k) break;
    for (size_t u = 0; u < k; u++) {
      double qq = d[0] - x[u];
      if (fabs(qq) < pivmin) qq = -pivmin;
      q[u] = qq;
      c[u] = qq < 0 ? 1.0 : 0.0;
    }
    for (size_t i = 1; i < n; i++) {
      double di = d[i], ei = e2[i - 1];
      for (size_t u = 0; u < k; u++) {
        double qq = di - x[u] - ei / q[u];
        qq = fabs(qq) < pivmin ? -pivmin : qq;
        q[u] = qq;
        c[u] += qq < 0 ? 1.0 : 0.0;
      }
    }
    for (size_t u = 0; u < k; u++)
      for (size_t j = 0; j < m; j++) {
        if (c[u] > (double)j) { if (x[u] < b[j]) b[j] = x[u]; }
        else if (x[u] > a[j]) a[j] = x[u];
      }
  }
  for (size_t j = 0; j < m; j++) w[j] = 0.5 * (a[j] + b[j]);
}

/* lowest m eigenvalues, ascending, to full accuracy (coarse = 0) or to 1e-10
 * of the 1-norm (coarse = 1: band_vectors' Rayleigh-Ritz step follows) */
static int band_values(const bandmod *bm, double p, size_t m, int coarse, double *w, band_scratch *bs,
                       lvs_ctx *tctx) {
  size_t n = bm->n, kd = bm->kd, ldab = kd + 1, ldg = 3 * kd + 1;
  double *buf = bs->buf;
  lapack_int *ibuf = bs->ibuf;
  double *ab = buf, *d = ab + ldab * n, *e = d + n, *work = e + n, *hb = work + 4 * n,
         *gb = hb + ldab * n, *wfull = gb + ldg * n;
  lapack_int *iwork = ibuf, *iblock = iwork + 3 * n, *isplit = iblock + n;
  double onenrm = band_form(bm, p, hb);
  memcpy(ab, hb, ldab * n * sizeof(double));
  double qdummy = 0;
  lapack_int info = LAPACKE_dsbtrd_work(LAPACK_COL_MAJOR, 'N', 'L', (lapack_int)n, (lapack_int)kd, ab,
                                        (lapack_int)ldab, d, e, &qdummy, 1, work);
  if (!info && coarse) {
    sturm_lowest(n, d, e, m, 1e-10 * onenrm, w, gb, bs->piv); /* gb, wfull and the rest: >= 6n */
    return LVS_OK;
  }
  lapack_int mfound = 0, nsplit = 0;
  /* with vectors the bisection may stop early: the Rayleigh-Ritz step below
   * makes the energies exact to rounding */
  double abstol = coarse ? 1e-10 * onenrm : 0.0;
  if (!info)
    info = LAPACKE_dstebz_work('I', 'E', (lapack_int)n, 0, 0, 1, (lapack_int)m, abstol, d, e, &mfound, &nsplit,
                               wfull, iblock, isplit, work, iwork);
  if (info || (size_t)mfound != m)
    return lvsi_fail(tctx, LVS_ELAPACK, "band eigensolver failed (info %d)", (int)info);
  memcpy(w, wfull, m * sizeof(double));
  return LVS_OK;
}

/* eigenvectors (n x m) of the m levels whose coarse energies band_values
 * left in w; w gets the Rayleigh-Ritz energies */
/* x <- x - <u|x> u for a unit vector u (real) */
static void project_out(const double *u, double *x, size_t n) {
  double o = 0;
  for (size_t i = 0; i < n; i++) o += u[i] * x[i];
  for (size_t i = 0; i < n; i++) x[i] -= o * u[i];
}

/* x <- x / |x|; nonzero when |x| is 0 or not finite */
static int normalize(double *x, size_t n) {
  double nn = 0;
  for (size_t i = 0; i < n; i++) nn += x[i] * x[i];
  nn = sqrt(nn);
  if (!(nn > 0) || !isfinite(nn)) return 1;
  for (size_t i = 0; i < n; i++) x[i] /= nn;
  return 0;
}

static int band_vectors(const bandmod *bm, double p, size_t m, double *w, double *vec, band_scratch *bs,
                        lvs_ctx *tctx) {
  size_t n = bm->n, kd = bm->kd, ldab = kd + 1, ldg = 3 * kd + 1;
  double *hb = bs->buf + ldab * n + 6 * n, *gb = hb + ldab * n;
  size_t *ipiv = bs->piv;
  double onenrm = band_form(bm, p, hb), abstol = 1e-10 * onenrm;
  lapack_int info;
  double eps = 2.220446049250313e-16, tiny = eps * onenrm, clus = 1e3 * abstol;
  for (size_t j = 0; j < m; j++) {
    double shift = w[j];
    double *xv = vec + j * n;
    /* start: a fixed vector with no special structure */
    for (size_t i = 0; i < n; i++) xv[i] = 1.0 + 0.25 * (double)((i * 7 + j * 3) % 11) / 11.0;
    memset(gb, 0, ldg * n * sizeof(double));
    for (size_t c = 0; c < n; c++)
      for (size_t r = 0; r <= kd && c + r < n; r++) {
        double hv = hb[c * ldab + r];
        gb[c * ldg + 2 * kd + r] = r ? hv : hv - shift;       /* H(c+r, c) */
        if (r) gb[(c + r) * ldg + 2 * kd - r] = hv;            /* H(c, c+r) */
      }
    band_lu(n, kd, gb, ipiv, tiny);
    for (int it = 0; it < 2; it++) {
      band_solve(n, kd, gb, ipiv, xv);
      /* against the levels whose shifts are close (they could converge to
       * the same vector); the others are orthonormalized before Rayleigh-Ritz */
      for (int pass = 0; pass <= it; pass++)
        for (size_t q = 0; q < j; q++)
          if (!(fabs(w[q] - w[j]) > clus)) project_out(vec + q * n, xv, n);
      if (normalize(xv, n))
        return lvsi_fail(tctx, LVS_ELAPACK, "band inverse iteration failed for level %zu", j + 1);
    }
  }
  /* Rayleigh-Ritz on span(X): G = X^T H X, G = Q diag(w) Q^T, X <- X Q
   * (Parlett, The Symmetric Eigenvalue Problem, 1980, ch. 11): energies
   * to rounding, and clusters the inverse iteration left mixed resolved */
  double *Y = bs->rr, *G = Y + n * m;
  for (size_t j = 1; j < m; j++) { /* modified Gram-Schmidt, twice */
    double *xv = vec + j * n;
    for (int pass = 0; pass < 2; pass++)
      for (size_t q = 0; q < j; q++) project_out(vec + q * n, xv, n);
    if (normalize(xv, n))
      return lvsi_fail(tctx, LVS_ELAPACK, "band inverse iteration failed for level %zu", j + 1);
  }
  for (size_t j = 0; j < m; j++) {
    const double *xv = vec + j * n;
    double *yv = Y + j * n;
    for (size_t i = 0; i < n; i++) yv[i] = 0;
    for (size_t c = 0; c < n; c++) {
      yv[c] += hb[c * ldab] * xv[c];
      for (size_t r = 1; r <= kd && c + r < n; r++) {
        yv[c + r] += hb[c * ldab + r] * xv[c];
        yv[c] += hb[c * ldab + r] * xv[c + r];
      }
    }
  }
  for (size_t a = 0; a < m; a++)
    for (size_t b = a; b < m; b++) {
      double g = 0;
      for (size_t i = 0; i < n; i++) g += vec[a * n + i] * Y[b * n + i];
      G[a * m + b] = G[b * m + a] = g;
    }
  info = LAPACKE_dsyev(LAPACK_COL_MAJOR, 'V', 'L', (lapack_int)m, G, (lapack_int)m, w);
  if (info) return lvsi_fail(tctx, LVS_ELAPACK, "band Rayleigh-Ritz failed (info %d)", (int)info);
  for (size_t j = 0; j < m; j++) {
    double *yv = Y + j * n;
    for (size_t i = 0; i < n; i++) {
      double acc = 0;
      for (size_t q = 0; q < m; q++) acc += vec[q * n + i] * G[j * m + q];
      yv[i] = acc;
    }
    size_t at = 0;
    for (size_t i = 1; i < n; i++)
      if (fabs(yv[i]) > fabs(yv[at])) at = i;
    if (yv[at] < 0)
      for (size_t i = 0; i < n; i++) yv[i] = -yv[i];
  }
  memcpy(vec, Y, n * m * sizeof(double));
  return LVS_OK;
}

static int solve_band(const bandmod *bm, double p, size_t m, double *w, double *vec, band_scratch *bs,
                      lvs_ctx *tctx) {
  int st = band_values(bm, p, m, vec != NULL, w, bs, tctx);
  if (!st && vec) st = band_vectors(bm, p, m, w, vec, bs, tctx);
  return st;
}

/* index of the sector whose next energy is lowest (ties: the lower sector) */
static size_t sector_next(const model *md, const double *ws, const size_t *wo, const size_t *lim, const size_t *at) {
  size_t best = md->nsec;
  for (size_t s = 0; s < md->nsec; s++) {
    if (at[s] >= lim[s]) continue;
    if (best == md->nsec || ws[wo[s] + at[s]] < ws[wo[best] + at[best]]) best = s;
  }
  return best;
}

/* sector path: the band path per symmetry sector, the lowest m of all
 * sectors merged, vectors embedded in the full space (zeros elsewhere) */
static int solve_sectors(const model *md, double p, size_t m, double *w, double *vec, band_scratch *bs,
                         lvs_ctx *tctx) {
  size_t n = md->n, ns = md->nsec;
  double *ws = lvsi_malloc(tctx, n * sizeof(double));
  size_t *ix = lvsi_malloc(tctx, 4 * ns * sizeof(size_t));
  double *rv = vec ? lvsi_malloc(tctx, n * m * sizeof(double)) : NULL;
  int st = LVS_OK;
  if (!ws || !ix || (vec && !rv)) {
    st = lvsi_fail(tctx, LVS_ENOMEM, "sweep: out of memory for a point");
    goto out;
  }
  size_t *wo = ix, *lim = ix + ns, *at = ix + 2 * ns, *vo = ix + 3 * ns;
  size_t off = 0;
  for (size_t s = 0; s < ns && !st; s++) {
    size_t nsz = md->sec[s].n;
    wo[s] = off;
    lim[s] = m < nsz ? m : nsz;
    at[s] = 0;
    st = band_values(&md->sec[s], p, lim[s], vec != NULL, ws + off, bs, tctx);
    off += lim[s];
  }
  if (st) goto out;
  /* the lowest m overall: how many come from each sector */
  for (size_t j = 0; j < m; j++) {
    size_t s = sector_next(md, ws, wo, lim, at);
    if (!vec) w[j] = ws[wo[s] + at[s]];
    at[s]++;
  }
  if (!vec) goto out;
  off = 0;
  for (size_t s = 0; s < ns && !st; s++) {
    lim[s] = at[s];
    at[s] = 0;
    vo[s] = off;
    if (lim[s]) st = band_vectors(&md->sec[s], p, lim[s], ws + wo[s], rv + off, bs, tctx);
    off += lim[s] * md->sec[s].n;
  }
  if (st) goto out;
  /* merge again on the Rayleigh-Ritz energies, embed the vectors */
  memset(vec, 0, n * m * sizeof(double));
  for (size_t j = 0; j < m; j++) {
    size_t s = sector_next(md, ws, wo, lim, at), nsz = md->sec[s].n;
    const size_t *idx = md->secidx + md->secoff[s];
    const double *x = rv + vo[s] + at[s] * nsz;
    w[j] = ws[wo[s] + at[s]];
    for (size_t i = 0; i < nsz; i++) vec[j * n + idx[i]] = x[i];
    at[s]++;
  }
out:
  lvsi_free(tctx, ws);
  lvsi_free(tctx, ix);
  lvsi_free(tctx, rv);
  return st;
}

/* ---- the Krylov path ------------------------------------------------------
 * H(p) = H0 + p V is refilled per point into a worker-owned CSC matrix on
 * the union pattern of H0 and V (one fused multiply-add per stored entry:
 * no dense copy, no pattern merge per point; exact zeros at p = 0 are
 * skipped by lvsi_components, so p = 0 keeps the sectors of H0 alone) and
 * solved by lvs_eigen_ex (sectors split, ARPACK per large sector). */

/* ARPACK keeps the state of its reverse-communication loop in Fortran SAVE
 * variables (dsaupd/dsaup2/dsaitr ...), so two runs at once in one process
 * corrupt each other (seen here as "corrupted size" aborts and runs ending
 * after a few restarts with info 1). The Krylov path's solves therefore
 * take turns: this lock is process-wide because that state is. */
static pthread_mutex_t arpack_mu = PTHREAD_MUTEX_INITIALIZER;

/* fixed pseudo-random entry i in [-0.5, 0.5) (splitmix64 of the index):
 * no structure, so every eigenvector of H(p) has a part in it */
static double noise_at(size_t i) {
  uint64_t z = 0x73776565ULL + 0x9e3779b97f4a7c15ULL * (uint64_t)(i + 1);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  z ^= z >> 31;
  return (double)(z >> 11) * 0x1.0p-53 - 0.5;
}

/* H(p) into bs->kh (made on first use, pattern copied once) */
static int krylov_form(lvs_ctx *tctx, const model *md, double p, band_scratch *bs) {
  size_t n = md->n, nnz = md->knnz, len = nnz * (md->cplx ? 2 : 1);
  if (!bs->kh) {
    int st = lvsi_mat_alloc(tctx, n, n, md->cplx, 1, nnz, &bs->kh);
    if (st) return st;
    memcpy(bs->kh->cp, md->kcp, (n + 1) * sizeof(size_t));
    for (size_t q = 0; q < nnz; q++) bs->kh->ri[q] = (uint32_t)md->kri[q]; /* rows < n < 2^32 */
    bs->kh->nnz = nnz;
    if (!(bs->kstart = lvsi_malloc(tctx, 2 * n * sizeof(double))))
      return lvsi_fail(tctx, LVS_ENOMEM, "sweep: out of memory for a point");
  }
  double *a = bs->kh->a;
  for (size_t q = 0; q < len; q++) a[q] = md->ka0[q] + p * md->ka1[q];
  return LVS_OK;
}

/* Warm start from the previous point's raw vectors (m columns): their sum
 * (every tracked level's direction in one vector; ARPACK takes one; on the
 * 200-point L = 14 Heisenberg sweep the points took 8.7 s so, 11.7 s from
 * the lowest vector alone, 12.5 s cold), plus SWEEP_KRYLOV_NOISE of its
 * norm along the fixed noise vector, so that a level of a
 * symmetry the sparsity does not show (absent from the previous vectors)
 * still has a part in the start and can enter the window from above. Real
 * entries only when H(p) is real (lvs_eigen_ex then runs the real Lanczos). */
static void krylov_start(const model *md, const double complex *warm, size_t m, int real_op, double *x) {
  size_t n = md->n, el = real_op ? 1 : 2;
  double nrm = 0, nn = 0;
  for (size_t i = 0; i < n; i++) {
    double complex t = 0;
    for (size_t j = 0; j < m; j++) t += warm[j * n + i];
    x[el * i] = creal(t);
    if (el == 2) x[el * i + 1] = cimag(t);
    nrm += creal(t) * creal(t) + cimag(t) * cimag(t);
  }
  for (size_t i = 0; i < n * el; i++) nn += noise_at(i) * noise_at(i);
  double f = SWEEP_KRYLOV_NOISE * sqrt(nrm / (nn > 0 ? nn : 1));
  for (size_t i = 0; i < n * el; i++) x[i] += f * noise_at(i);
}

/* lowest m pairs of H(p) on the Krylov path; warm: m vectors of a nearby
 * p (the previous point) or NULL (ARPACK's fixed start) */
static int solve_krylov(lvs_ctx *tctx, const model *md, double p, size_t m, double *w, double complex *vec,
                        band_scratch *bs, const double complex *warm) {
  size_t n = md->n;
  band_scratch own = {0};
  if (!bs) bs = &own;
  lvs_matrix *u = NULL;
  int st = krylov_form(tctx, md, p, bs);
  if (!st) {
    int real_op = !md->cplx;
    if (!real_op) {
      real_op = 1;
      for (size_t q = 0; q < md->knnz && real_op; q++) real_op = bs->kh->a[2 * q + 1] == 0.0;
    }
    /* H0 and V were checked Hermitian at the start, and a0 + p a1 on
     * mirror entries of one pattern stays so exactly: no check per point */
    lvs_eigen_opts eo = {.method = md->krylov == 2 ? LVS_EIGEN_KRYLOV : LVS_EIGEN_AUTO, .tol = SWEEP_KRYLOV_TOL,
                         .hermitian = 1};
    if (warm) {
      krylov_start(md, warm, m, real_op, bs->kstart);
      eo.start = bs->kstart;
    }
    pthread_mutex_lock(&arpack_mu);
    st = lvs_eigen_ex(bs->kh, NULL, m, vec != NULL, &eo, w, vec ? &u : NULL);
    pthread_mutex_unlock(&arpack_mu);
  }
  if (!st && vec) {
    const double *a = u->a;
    if (u->cplx)
      for (size_t q = 0; q < n * m; q++) vec[q] = a[2 * q] + I * a[2 * q + 1];
    else
      for (size_t q = 0; q < n * m; q++) vec[q] = a[q];
  }
  lvs_matrix_free(u);
  band_scratch_free(tctx, &own);
  return st;
}

/* lowest m energies of H(p) (and vectors as complex n x m when vec != NULL);
 * warm: the previous point's vectors for the Krylov path, or NULL */
static int solve_point_bs(lvs_ctx *tctx, const model *md, double p, size_t m, double *w,
                          double complex *vec, band_scratch *bs, const double *hfull, const double complex *warm) {
  size_t n = md->n;
  if (md->krylov) return solve_krylov(tctx, md, p, m, w, vec, bs, warm);
  if (md->kd >= 0 && !hfull) {
    band_scratch own = {0};
    if (!bs) bs = &own;
    int st = band_scratch_get(tctx, md, bs);
    double *rv = NULL;
    if (!st && vec) {
      rv = lvsi_malloc(tctx, n * m * sizeof(double));
      if (!rv) st = lvsi_fail(tctx, LVS_ENOMEM, "sweep: out of memory for a point");
    }
    if (!st && md->nsec >= 2) st = solve_sectors(md, p, m, w, rv, bs, tctx);
    else if (!st) {
      bandmod bm = {n, (size_t)md->kd, md->hb0, md->vb};
      st = solve_band(&bm, p, m, w, rv, bs, tctx);
    }
    if (!st && vec)
      for (size_t q = 0; q < n * m; q++) vec[q] = rv[q];
    lvsi_free(tctx, rv);
    band_scratch_free(tctx, &own);
    return st;
  }
  lvs_matrix *h = NULL, *u = NULL;
  int st = lvs_matrix_new(tctx, n, n, md->cplx, &h);
  if (st) return st;
  double *a = lvs_matrix_data(h);
  size_t len = n * n * (md->cplx ? 2 : 1);
  if (hfull) memcpy(a, hfull, len * sizeof(double));
  else
    for (size_t i = 0; i < len; i++) a[i] = md->h0[i] + p * md->v[i];
  st = lvs_eigen(h, m, vec != NULL, w, vec ? &u : NULL);
  if (!st && vec) {
    for (size_t j = 0; j < m; j++)
      for (size_t i = 0; i < n; i++) {
        double re, im;
        lvs_matrix_get(u, i, j, &re, &im);
        vec[j * n + i] = re + I * im;
      }
  }
  lvs_matrix_free(u);
  lvs_matrix_free(h);
  return st;
}

static int solve_point(lvs_ctx *tctx, const model *md, double p, size_t m, double *w, double complex *vec) {
  return solve_point_bs(tctx, md, p, m, w, vec, NULL, NULL, NULL);
}

/* ---- journal ------------------------------------------------------------- */
#define SWEEP_SYNC_SECONDS 1.0 /* journal durability: at most this much work lost */
#define JMAGIC "LVSWJ01\n"
#define JHEAD 48

static uint64_t fnv(uint64_t h, const void *p, size_t len) {
  const unsigned char *c = p;
  for (size_t i = 0; i < len; i++) {
    h ^= c[i];
    h *= 1099511628211ULL;
  }
  return h;
}
#define FNV0 14695981039346656037ULL

typedef struct {
  size_t n, count, npts;
  int cplx;
  uint64_t hash;
  size_t recsize;     /* bytes of one record */
  int fd;             /* own journal (append), -1 none */
  off_t end;          /* append offset of the own journal */
  double synced;      /* lvs_monotonic() of the last fdatasync */
  char *own;          /* its name */
  int nfiles;         /* files read (own first when present) */
  int *fds;
  char **names;
  int *rec_file;      /* per point: file index or -1 */
  off_t *rec_off;
} journal;

static void put64(unsigned char *b, uint64_t v) { memcpy(b, &v, 8); }

static void head_bytes(const journal *j, unsigned char *b) {
  memcpy(b, JMAGIC, 8);
  put64(b + 8, j->n);
  put64(b + 16, j->count);
  put64(b + 24, j->npts);
  put64(b + 32, (uint64_t)j->cplx);
  put64(b + 40, j->hash);
}

/* pread or pwrite all len bytes at off (retrying after signals); 0 or -1 */
static int io_full(int fd, unsigned char *c, size_t len, off_t off, int writing) {
  while (len) {
    ssize_t r = writing ? pwrite(fd, c, len, off) : pread(fd, c, len, off);
    if (r < 0 && errno == EINTR) continue;
    if (r <= 0) return -1;
    c += r;
    len -= (size_t)r;
    off += r;
  }
  return 0;
}

static int read_full(int fd, void *buf, size_t len, off_t off) { return io_full(fd, buf, len, off, 0); }

static int write_full(int fd, const void *buf, size_t len, off_t off) {
  return io_full(fd, (unsigned char *)buf, len, off, 1); /* pwrite only reads it */
}

static char *dupstr(lvs_ctx *ctx, const char *s) {
  size_t l = strlen(s);
  char *d = lvsi_malloc(ctx, l + 1);
  if (d) memcpy(d, s, l + 1);
  return d;
}

/* scan one file: index its good records; returns the end of the last good
 * record, or -1 with the error set (another sweep's file, unreadable) */
static off_t scan_file(lvs_ctx *ctx, journal *j, int fi, unsigned char *rec) {
  int fd = j->fds[fi];
  struct stat stt;
  if (fstat(fd, &stt) != 0) {
    lvsi_fail(ctx, LVS_EINVAL, "cannot read journal '%s': %s", j->names[fi], strerror(errno));
    return -1;
  }
  if (stt.st_size < JHEAD) return 0; /* empty or torn header: start anew */
  unsigned char hb[JHEAD], want[JHEAD];
  head_bytes(j, want);
  if (read_full(fd, hb, JHEAD, 0) != 0 || memcmp(hb, want, JHEAD) != 0) {
    lvsi_fail(ctx, LVS_EINVAL,
              "journal '%s' belongs to another sweep (other model, grid or level count); remove it to start anew",
              j->names[fi]);
    return -1;
  }
  off_t off = JHEAD;
  while (off + (off_t)j->recsize <= stt.st_size) {
    if (read_full(fd, rec, j->recsize, off) != 0) break;
    uint64_t k, chk;
    memcpy(&k, rec, 8);
    memcpy(&chk, rec + j->recsize - 8, 8);
    if (k >= j->npts || fnv(FNV0, rec, j->recsize - 8) != chk) { /* torn or forged: only this one */
      off += (off_t)j->recsize;
      continue;
    }
    if (j->rec_file[k] < 0) {
      j->rec_file[k] = fi;
      j->rec_off[k] = off;
    }
    off += (off_t)j->recsize;
  }
  return off;
}

static int journal_add_file(lvs_ctx *ctx, journal *j, const char *name, int fd) {
  j->fds[j->nfiles] = fd;
  j->names[j->nfiles] = dupstr(ctx, name);
  if (!j->names[j->nfiles]) {
    close(fd);
    return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
  }
  j->nfiles++;
  return LVS_OK;
}

static void journal_close(lvs_ctx *ctx, journal *j) {
  for (int i = 0; i < j->nfiles; i++) {
    if (j->fds[i] >= 0) close(j->fds[i]);
    lvsi_free(ctx, j->names[i]);
  }
  lvsi_free(ctx, j->fds);
  lvsi_free(ctx, j->names);
  lvsi_free(ctx, j->rec_file);
  lvsi_free(ctx, j->rec_off);
  lvsi_free(ctx, j->own);
  j->fds = NULL;
  j->names = NULL;
  j->rec_file = NULL;
  j->rec_off = NULL;
  j->own = NULL;
  j->nfiles = 0;
  j->fd = -1;
}

/* open the own journal (base.part or base.part.K-of-N) and, for a whole
 * run, every part file of the same sweep */
static int journal_open(lvs_ctx *ctx, journal *j, const char *base, size_t shard, size_t shards, int merge_only) {
  size_t bl = strlen(base);
  glob_t g;
  memset(&g, 0, sizeof g);
  int gl = 0;
  if (!shards) {
    char *pat = lvsi_malloc(ctx, 2 * bl + 32);
    if (!pat) return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
    /* escape glob specials in the base name */
    size_t q = 0;
    for (size_t i = 0; i < bl; i++) {
      if (strchr("*?[\\", base[i])) pat[q++] = '\\';
      pat[q++] = base[i];
    }
    strcpy(pat + q, ".part.*-of-*");
    gl = glob(pat, 0, NULL, &g) == 0;
    lvsi_free(ctx, pat);
  }
  size_t maxf = 1 + (gl ? g.gl_pathc : 0);
  j->fds = lvsi_calloc(ctx, maxf, sizeof(int));
  j->names = lvsi_calloc(ctx, maxf, sizeof(char *));
  j->rec_file = lvsi_malloc(ctx, j->npts * sizeof(int));
  j->rec_off = lvsi_malloc(ctx, j->npts * sizeof(off_t));
  j->own = lvsi_malloc(ctx, bl + 64);
  unsigned char *rec = lvsi_malloc(ctx, j->recsize);
  int st = LVS_OK;
  if (!j->fds || !j->names || !j->rec_file || !j->rec_off || !j->own || !rec) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory for the journal index");
    goto out;
  }
  for (size_t k = 0; k < j->npts; k++) j->rec_file[k] = -1;
  if (shards) snprintf(j->own, bl + 64, "%s.part.%zu-of-%zu", base, shard, shards);
  else snprintf(j->own, bl + 64, "%s.part", base);
  int fd = open(j->own, O_RDWR | O_CLOEXEC | O_NOFOLLOW | (merge_only ? 0 : O_CREAT), 0644); /* no links */
  if (fd < 0 && merge_only && errno == ENOENT) goto parts; /* a merge reads, never starts a journal */
  if (fd < 0) {
    st = lvsi_fail(ctx, LVS_EINVAL, "cannot open journal '%s': %s", j->own, strerror(errno));
    goto out;
  }
  struct stat jsb;
  if (fstat(fd, &jsb) != 0 || !S_ISREG(jsb.st_mode)) {
    close(fd);
    st = lvsi_fail(ctx, LVS_EINVAL, "journal '%s' is not a regular file", j->own);
    goto out;
  }
  /* one writer per journal: a second run on the same out= (and shard) stops
   * here instead of appending to, or removing, the first one's file */
  if (!merge_only && flock(fd, LOCK_EX | LOCK_NB) != 0) {
    int e = errno;
    close(fd);
    st = lvsi_fail(ctx, LVS_EINVAL, "journal '%s' is in use by another run (%s); wait for it or use another out=",
                   j->own, e == EWOULDBLOCK ? "locked" : strerror(e));
    goto out;
  }
  if ((st = journal_add_file(ctx, j, j->own, fd))) goto out;
  off_t end = scan_file(ctx, j, 0, rec);
  if (end < 0) {
    st = lvs_errcode(ctx);
    goto out;
  }
  if (end == 0) {
    unsigned char hb[JHEAD];
    head_bytes(j, hb);
    if (ftruncate(fd, 0) != 0 || write_full(fd, hb, JHEAD, 0) != 0 || fsync(fd) != 0) {
      st = lvsi_fail(ctx, LVS_EINVAL, "cannot write journal '%s': %s", j->own, strerror(errno));
      goto out;
    }
    end = JHEAD;
  } else if (ftruncate(fd, end) != 0) { /* cut a torn record */
    st = lvsi_fail(ctx, LVS_EINVAL, "cannot write journal '%s': %s", j->own, strerror(errno));
    goto out;
  }
  j->fd = fd;
  j->end = end;
parts:
  if (gl) {
    for (size_t i = 0; i < g.gl_pathc; i++) {
      int pf = open(g.gl_pathv[i], O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
      if (pf < 0) {
        st = lvsi_fail(ctx, LVS_EINVAL, "cannot read part file '%s': %s", g.gl_pathv[i], strerror(errno));
        goto out;
      }
      if ((st = journal_add_file(ctx, j, g.gl_pathv[i], pf))) goto out;
      if (scan_file(ctx, j, j->nfiles - 1, rec) < 0) {
        st = lvs_errcode(ctx);
        goto out;
      }
    }
  }
out:
  if (gl) globfree(&g);
  lvsi_free(ctx, rec);
  return st;
}

/* record of point k into rec (recsize bytes) */
static void pack_record(const journal *j, size_t k, const double *w, const double complex *u, unsigned char *rec) {
  uint64_t kk = k;
  memcpy(rec, &kk, 8);
  memcpy(rec + 8, w, j->count * 8);
  double *dv = (double *)(void *)(rec + 8 + j->count * 8);
  size_t len = j->n * j->count;
  if (j->cplx) memcpy(dv, u, len * sizeof(double complex));
  else
    for (size_t q = 0; q < len; q++) dv[q] = creal(u[q]);
  uint64_t chk = fnv(FNV0, rec, j->recsize - 8);
  memcpy(rec + j->recsize - 8, &chk, 8);
}

static int load_record(lvs_ctx *ctx, const journal *j, size_t k, double *w, double complex *u, unsigned char *rec) {
  int fi = j->rec_file[k];
  if (read_full(j->fds[fi], rec, j->recsize, j->rec_off[k]) != 0)
    return lvsi_fail(ctx, LVS_EINVAL, "cannot read journal '%s': %s", j->names[fi], strerror(errno));
  memcpy(w, rec + 8, j->count * 8);
  const double *dv = (const double *)(const void *)(rec + 8 + j->count * 8);
  size_t len = j->n * j->count;
  if (j->cplx) memcpy(u, dv, len * sizeof(double complex));
  else
    for (size_t q = 0; q < len; q++) u[q] = dv[q];
  return LVS_OK;
}

/* ---- workers ---------------------------------------------------------------- */
typedef struct {
  pthread_mutex_t mu;
  journal *j;           /* NULL: no journal */
  size_t done, total;   /* progress */
  void (*progress)(void *ud, size_t done, size_t total);
  void *progress_ud;
  int io_err;
  char io_msg[300];
  size_t next;          /* Krylov path: next entry of todo to hand out (under mu) */
} shared_out;

typedef struct {
  const model *md;
  double from, to;
  size_t steps;
  size_t k0;            /* first point of the block */
  const size_t *todo;   /* points to compute */
  size_t ntodo;
  const double *hmat;   /* family: dense H(p_k) at (k - k0) * hlen, else NULL */
  size_t hlen;
  double *w;            /* (k - k0) * count */
  double complex *vec;  /* (k - k0) * n * count */
  int tid, nthreads;
  locked_alloc *la;
  size_t dense_cap;
  shared_out *so;
  int st;
  char msg[512];
  lvs_fence *fence; /* the caller's context's (NULL: none) */
} worker;

/* point k by worker wk: solve, journal, progress; nonzero to stop */
static int work_point(worker *wk, lvs_ctx *tctx, band_scratch *bs, unsigned char *rec, size_t k) {
  const model *md = wk->md;
  shared_out *so = wk->so;
  double p = grid_p(wk->from, wk->to, wk->steps, k);
  double *w = wk->w + (k - wk->k0) * md->count;
  double complex *u = wk->vec + (k - wk->k0) * md->n * md->count;
  /* Krylov path: inside a run, the previous point (computed just before by
   * this worker, or read from the journal) is the warm start */
  const double complex *warm = md->krylov && k % LVS_SWEEP_KRYLOV_RUN ? u - md->n * md->count : NULL;
  int st = lvsi_fence(tctx, "sweep");
  if (!st) st = solve_point_bs(tctx, md, p, md->count, w, u, bs, wk->hmat ? wk->hmat + (k - wk->k0) * wk->hlen : NULL,
                          warm);
  if (st) {
    wk->st = st;
    snprintf(wk->msg, sizeof wk->msg, "at p = %.17g: %s", p, lvs_errmsg(tctx));
    return 1;
  }
  if (rec) pack_record(so->j, k, w, u, rec);
  pthread_mutex_lock(&so->mu);
  if (rec && !so->io_err) {
    journal *j = so->j;
    double now = lvs_monotonic();
    int sync = now - j->synced >= SWEEP_SYNC_SECONDS;
    if (write_full(j->fd, rec, j->recsize, j->end) != 0 || (sync && fdatasync(j->fd) != 0)) {
      so->io_err = 1;
      snprintf(so->io_msg, sizeof so->io_msg, "cannot write journal '%s': %s", j->own, strerror(errno));
    } else {
      j->end += (off_t)j->recsize;
      if (sync) j->synced = now;
    }
  }
  so->done++;
  if (so->progress) so->progress(so->progress_ud, so->done, so->total);
  int bad = so->io_err;
  pthread_mutex_unlock(&so->mu);
  return bad;
}

/* Krylov path: the todo points of one whole run at a time (taken in turn
 * by whichever worker is free), in ascending order, so each point but a
 * run's first starts from its predecessor; the runs are fixed by the grid
 * (LVS_SWEEP_KRYLOV_RUN points), so the numbers do not depend on the
 * thread count or on which worker takes a run */
static void work_runs(worker *wk, lvs_ctx *tctx, band_scratch *bs, unsigned char *rec) {
  shared_out *so = wk->so;
  for (;;) {
    pthread_mutex_lock(&so->mu);
    size_t t0 = so->next, t1 = t0;
    if (t0 < wk->ntodo) {
      size_t run = wk->todo[t0] / LVS_SWEEP_KRYLOV_RUN;
      while (t1 < wk->ntodo && wk->todo[t1] / LVS_SWEEP_KRYLOV_RUN == run) t1++;
    }
    so->next = t1;
    int bad = so->io_err;
    pthread_mutex_unlock(&so->mu);
    if (t0 == t1 || bad) return;
    for (size_t t = t0; t < t1; t++)
      if (work_point(wk, tctx, bs, rec, wk->todo[t])) {
        pthread_mutex_lock(&so->mu);
        so->next = wk->ntodo; /* the others stop at their next run */
        pthread_mutex_unlock(&so->mu);
        return;
      }
  }
}

static void *work(void *arg) {
  worker *wk = arg;
  wk->st = LVS_OK;
  lvs_ctx *tctx = lvs_ctx_new(locked_alloc_fn, wk->la);
  if (!tctx) {
    wk->st = LVS_ENOMEM;
    snprintf(wk->msg, sizeof wk->msg, "sweep: out of memory for a worker context");
    return NULL;
  }
  lvs_ctx_set_dense_cap(tctx, wk->dense_cap);
  lvs_ctx_set_fence(tctx, wk->fence);
  shared_out *so = wk->so;
  band_scratch bs = {0};
  unsigned char *rec = NULL;
  if (so->j) {
    rec = lvsi_malloc(tctx, so->j->recsize);
    if (!rec) {
      wk->st = LVS_ENOMEM;
      snprintf(wk->msg, sizeof wk->msg, "sweep: out of memory for a journal record");
      lvs_ctx_free(tctx);
      return NULL;
    }
  }
  if (wk->md->krylov)
    work_runs(wk, tctx, &bs, rec);
  else
    for (size_t t = (size_t)wk->tid; t < wk->ntodo; t += (size_t)wk->nthreads)
      if (work_point(wk, tctx, &bs, rec, wk->todo[t])) break;
  lvsi_free(tctx, rec);
  band_scratch_free(tctx, &bs);
  lvs_ctx_free(tctx);
  return NULL;
}

/* compute the listed points of a block with nthreads threads */
static int run_workers(lvs_ctx *ctx, worker *tmpl, int nthreads) {
  worker wk[SWEEP_MAX_THREADS];
  pthread_t th[SWEEP_MAX_THREADS];
  int nt = nthreads;
  if ((size_t)nt > tmpl->ntodo) nt = (int)tmpl->ntodo;
  if (nt < 1) return LVS_OK;
  tmpl->so->next = 0;
  for (int t = 0; t < nt; t++) {
    wk[t] = *tmpl;
    wk[t].tid = t;
    wk[t].nthreads = nt;
  }
  int started = 0;
  for (int t = 1; t < nt; t++) {
    if (pthread_create(&th[t], NULL, work, &wk[t]) != 0) break;
    started = t;
  }
  for (int t = started + 1; t < nt; t++) work(&wk[t]); /* threads that could not start */
  work(&wk[0]);
  for (int t = 1; t <= started; t++) pthread_join(th[t], NULL);
  for (int t = 0; t < nt; t++)
    if (wk[t].st) return lvsi_fail(ctx, wk[t].st, "%s", wk[t].msg);
  if (tmpl->so->io_err) return lvsi_fail(ctx, LVS_EINVAL, "%s", tmpl->so->io_msg);
  return LVS_OK;
}

/* ---- Hungarian method: minimize sum c[i][pi(i)] over permutations ----------
 * c is m x m row-major; pi receives the column of each row. Potentials u, v
 * and the shortest augmenting path from each new row (Kuhn 1955; Munkres
 * 1957). Work arrays are (m+1) long. */
static void hungarian(size_t m, const double *c, size_t *pi, double *u, double *v, double *minv,
                      size_t *match, size_t *way, char *used) {
  /* 1-based: row 0 / column 0 are the virtual start */
  for (size_t j = 0; j <= m; j++) {
    u[j] = v[j] = 0.0;
    match[j] = 0;
    way[j] = 0;
  }
  for (size_t i = 1; i <= m; i++) {
    match[0] = i;
    size_t j0 = 0;
    for (size_t j = 0; j <= m; j++) {
      minv[j] = INFINITY;
      used[j] = 0;
    }
    do {
      used[j0] = 1;
      size_t i0 = match[j0], j1 = 0;
      double delta = INFINITY;
      for (size_t j = 1; j <= m; j++) {
        if (used[j]) continue;
        double cur = c[(i0 - 1) * m + (j - 1)] - u[i0] - v[j];
        if (cur < minv[j]) {
          minv[j] = cur;
          way[j] = j0;
        }
        if (minv[j] < delta) {
          delta = minv[j];
          j1 = j;
        }
      }
      if (j1 == 0) { /* no finite cost left (callers pass finite ones): take the first free column */
        for (size_t j = 1; j <= m && !j1; j++)
          if (!used[j]) j1 = j;
        delta = 0;
      }
      for (size_t j = 0; j <= m; j++) {
        if (used[j]) {
          u[match[j]] += delta;
          v[j] -= delta;
        } else {
          minv[j] -= delta;
        }
      }
      j0 = j1;
    } while (match[j0] != 0);
    do {
      size_t j1 = way[j0];
      match[j0] = match[j1];
      j0 = j1;
    } while (j0);
  }
  for (size_t j = 1; j <= m; j++) pi[match[j] - 1] = j - 1;
}

/* <a|b> in plain real arithmetic (C's complex product checks for NaN and
 * infinity on every term, which costs more than the sweep's tracking) */
static double complex dotc(const double complex *a, const double complex *b, size_t n) {
  const double *x = (const double *)(const void *)a, *y = (const double *)(const void *)b;
  double re = 0, im = 0;
  for (size_t i = 0; i < 2 * n; i += 2) {
    re += x[i] * y[i] + x[i + 1] * y[i + 1];
    im += x[i] * y[i + 1] - x[i + 1] * y[i];
  }
  return re + I * im;
}

/* Replace the vectors of each degenerate set of point `cur` (energies w,
 * ascending) by the orthonormalized projections of the previous vectors
 * `prev` (count columns) that project most into the set. */
static void fix_degenerate(size_t n, size_t count, const double *w, double complex *cur,
                           const double complex *prev, double tol, double complex *tmp,
                           double *norm2, char *taken) {
  size_t a = 0;
  while (a < count) {
    size_t b = a + 1;
    while (b < count && w[b] - w[b - 1] <= tol) b++;
    size_t m = b - a;
    if (m > 1) {
      /* projection norms of each previous vector into span(cur[a..b)) */
      for (size_t i = 0; i < count; i++) {
        double s = 0;
        for (size_t d = a; d < b; d++) {
          double complex o = dotc(cur + d * n, prev + i * n, n);
          s += creal(o) * creal(o) + cimag(o) * cimag(o);
        }
        norm2[i] = s;
        taken[i] = 0;
      }
      size_t filled = 0;
      for (size_t round = 0; round < count && filled < m; round++) {
        size_t best = count;
        for (size_t i = 0; i < count; i++)
          if (!taken[i] && (best == count || norm2[i] > norm2[best])) best = i;
        if (best == count || norm2[best] < 1e-6) break;
        taken[best] = 1;
        /* projection of prev[best] into the set */
        double complex *t = tmp + filled * n;
        for (size_t r = 0; r < n; r++) t[r] = 0;
        for (size_t d = a; d < b; d++) {
          double complex o = dotc(cur + d * n, prev + best * n, n);
          for (size_t r = 0; r < n; r++) t[r] += o * cur[d * n + r];
        }
        /* Gram-Schmidt against the ones already taken (twice for accuracy) */
        for (int pass = 0; pass < 2; pass++)
          for (size_t q = 0; q < filled; q++) {
            double complex o = dotc(tmp + q * n, t, n);
            for (size_t r = 0; r < n; r++) t[r] -= o * tmp[q * n + r];
          }
        double nn = sqrt(creal(dotc(t, t, n)));
        if (nn < 1e-3) continue;
        for (size_t r = 0; r < n; r++) t[r] /= nn;
        filled++;
      }
      /* complete with the original vectors of the set if needed */
      for (size_t d = a; d < b && filled < m; d++) {
        double complex *t = tmp + filled * n;
        memcpy(t, cur + d * n, n * sizeof *t);
        for (int pass = 0; pass < 2; pass++)
          for (size_t q = 0; q < filled; q++) {
            double complex o = dotc(tmp + q * n, t, n);
            for (size_t r = 0; r < n; r++) t[r] -= o * tmp[q * n + r];
          }
        double nn = sqrt(creal(dotc(t, t, n)));
        if (nn < 1e-3) continue;
        for (size_t r = 0; r < n; r++) t[r] /= nn;
        filled++;
      }
      if (filled == m) memcpy(cur + a * n, tmp, m * n * sizeof *tmp);
    }
    a = b;
  }
}

/* gap between ranks r and r+1 (0-based) of H(p) */
static int family_at(lvs_ctx *ctx, const model *md, double p, double *out) {
  char msg[400];
  msg[0] = 0;
  if (md->family(md->family_ud, p, out, msg, sizeof msg) != 0)
    return lvsi_fail(ctx, LVS_EINVAL, "H(p) at p = %.17g: %s", p, msg[0] ? msg : "the family failed");
  return LVS_OK;
}

/* Krylov path: the golden-section search's solves, each started from the
 * vectors of the one before (points closer and closer together); vc and
 * vp hold n x (r + 2) values each, *first says none is there yet */
typedef struct {
  band_scratch bs;
  double complex *vc, *vp;
  int first;
} gap_warm;

static int gap_at(lvs_ctx *ctx, const model *md, double p, size_t r, double *w, double *g, gap_warm *gw) {
  int st;
  if (gw) {
    st = solve_krylov(ctx, md, p, r + 2, w, gw->vc, &gw->bs, gw->first ? NULL : gw->vp);
    if (st) return st;
    double complex *t = gw->vc;
    gw->vc = gw->vp;
    gw->vp = t;
    gw->first = 0;
    *g = w[r + 1] - w[r];
    return LVS_OK;
  }
  if (md->family) {
    size_t len = md->n * md->n * (md->cplx ? 2 : 1);
    double *hf = lvsi_malloc(ctx, len * sizeof(double));
    if (!hf) return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
    st = family_at(ctx, md, p, hf);
    if (!st) st = solve_point_bs(ctx, md, p, r + 2, w, NULL, NULL, hf, NULL);
    lvsi_free(ctx, hf);
  } else {
    st = solve_point(ctx, md, p, r + 2, w, NULL);
  }
  if (st) return st;
  *g = w[r + 1] - w[r];
  return LVS_OK;
}

static int add_crossing(lvs_sweep *s, size_t *cap, const lvs_sweep_crossing *c) {
  if (s->ncross == *cap) {
    size_t nc = *cap ? 2 * *cap : 8;
    lvs_sweep_crossing *q = lvsi_malloc(s->ctx, nc * sizeof *q);
    if (!q) return lvsi_fail(s->ctx, LVS_ENOMEM, "sweep: out of memory for the crossing list");
    if (s->ncross) memcpy(q, s->cross, s->ncross * sizeof *q);
    lvsi_free(s->ctx, s->cross);
    s->cross = q;
    *cap = nc;
  }
  s->cross[s->ncross++] = *c;
  return LVS_OK;
}

typedef struct {
  double e;
  size_t a;
} ranked;

static int cmp_ranked(const void *x, const void *y) {
  const ranked *p = x, *q = y;
  if (p->e < q->e) return -1;
  if (p->e > q->e) return 1;
  return (p->a > q->a) - (p->a < q->a);
}

static int cmp_cross(const void *a, const void *b) {
  const lvs_sweep_crossing *x = a, *y = b;
  if (x->at < y->at) return -1;
  if (x->at > y->at) return 1;
  return (x->i > y->i) - (x->i < y->i);
}

/* ---- the sweep ------------------------------------------------------------ */
static void free_used(lvs_ctx *ctx, char **used) {
  if (!used) return;
  for (size_t i = 0; used[i]; i++) lvsi_free(ctx, used[i]);
  lvsi_free(ctx, used);
}

void lvs_sweep_free(lvs_sweep *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  lvsi_free(ctx, s->e);
  lvsi_free(ctx, s->ser);
  lvsi_free(ctx, s->cross);
  free_used(ctx, s->used);
  lvsi_free(ctx, s->pname);
  lvsi_free(ctx, s->punit);
  lvsi_free(ctx, s->eunit);
  lvsi_free(ctx, s);
}

/* half-bandwidth of a dense real n x n array */
static long bandwidth(const double *a, size_t n) {
  long kd = 0;
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++)
      if (a[j * n + i] != 0) {
        long d = (long)(i > j ? i - j : j - i);
        if (d > kd) kd = d;
      }
  return kd;
}

/* series energies beside the tracked levels (see the head comment) */
static int add_series(lvs_sweep *s, const lvs_sweep_spec *spec) {
  lvs_ctx *ctx = s->ctx;
  size_t count = s->count, npts = s->npts;
  size_t *lev = lvsi_malloc(ctx, count * sizeof(size_t));
  ranked *srt = lvsi_malloc(ctx, count * sizeof(ranked));
  s->ser = lvsi_malloc(ctx, count * npts * sizeof(double));
  if (!lev || !srt || !s->ser) {
    lvsi_free(ctx, lev);
    lvsi_free(ctx, srt);
    return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory for the series");
  }
  for (size_t a = 0; a < count; a++) lev[a] = a;
  lvs_series *ps = NULL;
  /* model spaces for the strengths the sweep reaches (lambda_max: the
   * largest |p| on the grid), so nearly degenerate levels follow the exact
   * curves through a near-crossing of the unperturbed levels */
  lvs_series_opts so;
  lvs_series_opts_init(&so);
  so.lambda_max = fmax(fabs(s->from), fabs(s->to));
  if (!(so.lambda_max > 0)) so.lambda_max = 1.0;
  int st = lvs_series_new_ex(spec->h0, spec->v, spec->series_order, lev, count, &so, &ps);
  if (!st) {
    /* pairing by continuity: at the grid point nearest p = 0 that is not
     * p = 0 itself (there degenerate levels of H0 have no order), the
     * series values and the tracked levels are both ranked, and rank meets
     * rank; series and tracked curves then run on together */
    size_t k0 = 0;
    double best = INFINITY;
    for (size_t k = 0; k < npts; k++) {
      double d = fabs(grid_p(s->from, s->to, npts - 1, k));
      if (d > 0 && d < best) { best = d; k0 = k; }
    }
    ranked *sr = lvsi_malloc(ctx, count * sizeof *sr);
    if (!sr) st = lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory for the series");
    double p0 = grid_p(s->from, s->to, npts - 1, k0);
    for (size_t a = 0; a < count && !st; a++) {
      srt[a].e = s->e[a * npts + k0];
      srt[a].a = a;
      sr[a].a = a;
      st = lvs_series_at(ps, a, p0, &sr[a].e);
    }
    if (!st) {
      qsort(srt, count, sizeof *srt, cmp_ranked);
      qsort(sr, count, sizeof *sr, cmp_ranked);
    }
    for (size_t r = 0; r < count && !st; r++) {
      size_t a = srt[r].a, lev = sr[r].a;
      for (size_t k = 0; k < npts && !st; k++)
        st = lvs_series_at(ps, lev, grid_p(s->from, s->to, npts - 1, k), &s->ser[a * npts + k]);
    }
    lvsi_free(ctx, sr);
  }
  lvs_series_free(ps);
  lvsi_free(ctx, lev);
  lvsi_free(ctx, srt);
  if (st) {
    lvsi_free(ctx, s->ser);
    s->ser = NULL;
  }
  s->series_order = st ? 0 : spec->series_order;
  return st;
}

/* Everything one lvs_sweep_new call holds while it runs; the phases below
 * fill it in order and job_free releases it (NULL members are fine). */
typedef struct {
  lvs_ctx *ctx;
  const lvs_sweep_spec *spec;
  size_t n, count, steps, npts;
  int cplx, nthreads;
  lvs_sweep *s;
  model md;
  /* model: dense visible blocks, band storage, symmetry sectors */
  double *h0a, *va, *bandst, *secband;
  size_t *seccomp, *secoff, *secidx, nsec;
  bandmod *secs;
  int path, auto_path; /* SWEEP_PATH_*: the one taken, the one AUTO takes */
  lvs_matrix *ph0, *pv; /* plain visible copies (deciding AUTO; the Krylov path) */
  size_t *kcp, *kri;    /* Krylov path: union pattern and values (model.k*) */
  double *ka;
  /* journal and the workers' shared output */
  journal jn;
  shared_out so;
  locked_alloc la;
  unsigned char *rec;
  /* points of a block and the tracking state */
  size_t blk;
  double *hbuf, *wblk, *work_d;
  double complex *vblk, *prev, *tmp;
  size_t *pi, *perm, *iw, *todo;
  char *cw;
  ranked *srt;
  size_t ccap;
  double escale, degen_tol;
  int blas_threads;
} sweep_job;

enum { SWEEP_PATH_DENSE, SWEEP_PATH_BAND, SWEEP_PATH_KRYLOV };

static int job_nomem(sweep_job *jb) { return lvsi_fail(jb->ctx, LVS_ENOMEM, "sweep: out of memory"); }

/* phase 1: the spec, checked before anything is allocated */
static int spec_check(lvs_ctx *ctx, const lvs_sweep_spec *spec) {
  if (!spec || !spec->h0 || !spec->v)
    return lvsi_fail(ctx, LVS_EINVAL, spec && spec->family ? "sweep of a family needs H(from) and H(to)"
                                                           : "sweep needs H0 and V");
  const lvs_matrix *h0 = spec->h0, *v = spec->v;
  const char *n0 = spec->family ? "H(from)" : "H0", *n1 = spec->family ? "H(to)" : "V";
  int st;
  if ((st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, n0))) return st;
  if ((st = lvsi_check_hermitian(v, LVS_DEFAULT_HERM_TOL, n1))) return st;
  if (spec->family && spec->series_order > 0)
    return lvsi_fail(ctx, LVS_EINVAL, "series needs H0 and V (not a family given as a function)");
  size_t n = lvs_matrix_rows(h0);
  if (lvs_matrix_rows(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "H0 is %zux%zu but V is %zux%zu", n, n, lvs_matrix_rows(v),
                     lvs_matrix_cols(v));
  if (!isfinite(spec->from) || !isfinite(spec->to))
    return lvsi_fail(ctx, LVS_EINVAL, "from and to must be finite numbers");
  if (spec->from == spec->to)
    return lvsi_fail(ctx, LVS_EINVAL, "from and to are equal (%.17g): nothing to sweep", spec->from);
  if (spec->steps < 1 || spec->steps > SWEEP_MAX_STEPS)
    return lvsi_fail(ctx, LVS_ERANGE, "steps must be from 1 to %d, got %zu", SWEEP_MAX_STEPS, spec->steps);
  if (spec->count < 1 || spec->count > n)
    return lvsi_fail(ctx, LVS_ERANGE, "count must be from 1 to %zu, got %zu", n, spec->count);
  int nthreads = spec->threads ? spec->threads : 2;
  if (nthreads < 1 || nthreads > SWEEP_MAX_THREADS)
    return lvsi_fail(ctx, LVS_ERANGE, "threads must be from 1 to %d, got %d", SWEEP_MAX_THREADS, nthreads);
  if (spec->series_order < 0 || spec->series_order > 1000)
    return lvsi_fail(ctx, LVS_ERANGE, "series order must be from 0 to 1000, got %d", spec->series_order);
  if (spec->shards && (spec->shard < 1 || spec->shard > spec->shards))
    return lvsi_fail(ctx, LVS_ERANGE, "shard must be from 1 to %zu, got %zu", spec->shards, spec->shard);
  if ((spec->shards || spec->merge_only) && (!spec->journal || !*spec->journal))
    return lvsi_fail(ctx, LVS_EINVAL, "shards and merges need an output path (the journal base)");
  if (spec->method < LVS_SWEEP_AUTO || spec->method > LVS_SWEEP_KRYLOV)
    return lvsi_fail(ctx, LVS_EINVAL, "sweep: unknown method %d", spec->method);
  const char *mname = spec->method == LVS_SWEEP_BAND ? "band" : "krylov";
  if (spec->family && (spec->method == LVS_SWEEP_BAND || spec->method == LVS_SWEEP_KRYLOV))
    return lvsi_fail(ctx, LVS_EINVAL, "method '%s' needs H0 and V (not a family given as a function)", mname);
  if (spec->method == LVS_SWEEP_BAND && (lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v) || n < 16))
    return lvsi_fail(ctx, LVS_EINVAL, "method 'band' needs a real H0 and V of at least 16 states (got %zu, %s)", n,
                     lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v) ? "complex" : "real");
  return lvsi_dense_ok(ctx, spec->count, spec->steps + 1, sizeof(double), "sweep (energies)");
}

/* phase 2a: dense copies of the visible blocks, both of the common kind,
 * and (real models) the components of the union sparsity of H0 and V */
static int model_dense(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  size_t n = jb->n;
  int cplx = jb->cplx, st;
  lvs_matrix *dh = NULL, *dv = NULL;
  if ((st = lvs_matrix_visible(jb->spec->h0, 1, &dh)) || (st = lvs_matrix_visible(jb->spec->v, 1, &dv))) goto out;
  size_t len = n * n * (cplx ? 2 : 1);
  jb->h0a = lvsi_malloc(ctx, len * sizeof(double));
  jb->va = lvsi_malloc(ctx, len * sizeof(double));
  if (!jb->h0a || !jb->va) {
    st = job_nomem(jb);
    goto out;
  }
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double re, im;
      size_t at = j * n + i;
      lvs_matrix_get(dh, i, j, &re, &im);
      if (cplx) { jb->h0a[2 * at] = re; jb->h0a[2 * at + 1] = im; } else jb->h0a[at] = re;
      lvs_matrix_get(dv, i, j, &re, &im);
      if (cplx) { jb->va[2 * at] = re; jb->va[2 * at + 1] = im; } else jb->va[at] = re;
    }
  if (!cplx && n >= 16 && !jb->spec->family) {
    jb->seccomp = lvsi_malloc(ctx, n * sizeof(size_t));
    if (!jb->seccomp) st = job_nomem(jb);
    else st = lvsi_components(dh, dv, jb->seccomp, &jb->nsec);
  }
out:
  lvs_matrix_free(dh);
  lvs_matrix_free(dv);
  return st;
}

/* phase 2b: the band path when H0 and V are real and banded (4 kd <= n) */
static int model_band(sweep_job *jb) {
  size_t n = jb->n;
  if (jb->cplx || n < 16 || jb->spec->family) return LVS_OK;
  long k1 = bandwidth(jb->h0a, n), k2 = bandwidth(jb->va, n);
  long kd = k1 > k2 ? k1 : k2;
  if (jb->spec->method == LVS_SWEEP_BAND && kd < 1) kd = 1; /* forced: a diagonal model too */
  if (!(kd >= 1 && (4 * (size_t)kd <= n || jb->spec->method == LVS_SWEEP_BAND))) return LVS_OK;
  size_t ld = (size_t)kd + 1;
  jb->bandst = lvsi_calloc(jb->ctx, 2 * ld * n, sizeof(double));
  if (!jb->bandst) return job_nomem(jb);
  for (size_t j = 0; j < n; j++)
    for (size_t r = 0; r < ld && j + r < n; r++) {
      jb->bandst[j * ld + r] = jb->h0a[j * n + j + r];
      jb->bandst[ld * n + j * ld + r] = jb->va[j * n + j + r];
    }
  jb->md.kd = kd;
  jb->md.hb0 = jb->bandst;
  jb->md.vb = jb->bandst + ld * n;
  return LVS_OK;
}

/* phase 2c: per symmetry sector (band path, >= 2 sectors): its states
 * ascending, its half-bandwidth in that order (never above the full one),
 * its band storage */
static int model_sectors(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  size_t n = jb->n, nsec = jb->nsec;
  const size_t *seccomp = jb->seccomp;
  const double *h0a = jb->h0a, *va = jb->va;
  if (jb->md.kd < 0 || nsec < 2) return LVS_OK;
  size_t *secoff = jb->secoff = lvsi_calloc(ctx, nsec + 1 + 2 * n, sizeof(size_t));
  bandmod *secs = jb->secs = lvsi_calloc(ctx, nsec, sizeof *secs);
  if (!secoff || !secs) return job_nomem(jb);
  size_t *secidx = jb->secidx = secoff + nsec + 1;
  size_t *pos = secidx + n;
  for (size_t i = 0; i < n; i++) secoff[seccomp[i] + 1]++;
  for (size_t c = 0; c < nsec; c++) secoff[c + 1] += secoff[c];
  for (size_t c = 0; c < nsec; c++) secs[c].n = 0;
  for (size_t i = 0; i < n; i++) {
    size_t c = seccomp[i];
    pos[i] = secs[c].n++;
    secidx[secoff[c] + pos[i]] = i;
  }
  for (size_t j = 0; j < n; j++)
    for (size_t i = j + 1; i < n && i <= j + (size_t)jb->md.kd; i++)
      if (h0a[j * n + i] != 0 || va[j * n + i] != 0) {
        size_t c = seccomp[i], d = pos[i] - pos[j];
        if (d > secs[c].kd) secs[c].kd = d;
      }
  size_t tot = 0;
  for (size_t c = 0; c < nsec; c++) {
    if (secs[c].kd < 1) secs[c].kd = 1;
    tot += 2 * (secs[c].kd + 1) * secs[c].n;
  }
  double *at = jb->secband = lvsi_calloc(ctx, tot, sizeof(double));
  if (!at) return job_nomem(jb);
  for (size_t c = 0; c < nsec; c++) {
    size_t ld = secs[c].kd + 1, nc = secs[c].n;
    const size_t *idx = secidx + secoff[c];
    for (size_t b = 0; b < nc; b++)
      for (size_t r = 0; r < ld && b + r < nc; r++) {
        size_t gi = idx[b + r], gj = idx[b];
        at[b * ld + r] = h0a[gj * n + gi];
        at[ld * nc + b * ld + r] = va[gj * n + gi];
      }
    secs[c].hb0 = at;
    secs[c].vb = at + ld * nc;
    at += 2 * ld * nc;
  }
  jb->md.nsec = nsec;
  jb->md.secoff = secoff;
  jb->md.secidx = secidx;
  jb->md.sec = secs;
  return LVS_OK;
}

/* the entries of column j of a plain matrix in ascending rows: a sparse
 * column as stored, a dense one's nonzeros */
typedef struct {
  const lvs_matrix *m;
  size_t j, k, end;
} colcur;

static void cur_skip(colcur *c) {
  const lvs_matrix *m = c->m;
  if (m->sparse) return;
  size_t w = m->cplx ? 2 : 1, at = c->j * m->rows;
  while (c->k < c->end && m->a[w * (at + c->k)] == 0.0 && (w == 1 || m->a[w * (at + c->k) + 1] == 0.0)) c->k++;
}

static void cur_start(colcur *c, const lvs_matrix *m, size_t j) {
  c->m = m;
  c->j = j;
  c->k = m->sparse ? m->cp[j] : 0;
  c->end = m->sparse ? m->cp[j + 1] : m->rows;
  cur_skip(c);
}

static size_t cur_row(const colcur *c) {
  if (c->k >= c->end) return SIZE_MAX;
  return c->m->sparse ? c->m->ri[c->k] : c->k;
}

/* value of the current entry (re, im) and advance */
static void cur_take(colcur *c, double *re, double *im) {
  const lvs_matrix *m = c->m;
  size_t w = m->cplx ? 2 : 1, at = m->sparse ? c->k : c->j * m->rows + c->k;
  *re = m->a[w * at];
  *im = w == 2 ? m->a[w * at + 1] : 0.0;
  c->k++;
  cur_skip(c);
}

/* phase 2d: the Krylov path's model, the union pattern of the plain
 * copies of H0 and V with each one's values on it (two passes: count,
 * fill); no dense copy of anything n x n */
static int has_imag(const lvs_matrix *m) {
  if (!m->cplx) return 0;
  size_t cnt = m->sparse ? m->nnz : m->rows * m->cols;
  for (size_t k = 0; k < cnt; k++)
    if (m->a[2 * k + 1] != 0.0) return 1;
  return 0;
}

static int model_krylov(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  /* complex storage with every imaginary part zero (Sy Sy products) is a
   * real model: real values, real records, the real Lanczos, no per-point
   * real copy inside lvs_eigen_ex */
  if (jb->cplx && !has_imag(jb->ph0) && !has_imag(jb->pv)) jb->cplx = 0;
  jb->md.cplx = jb->cplx;
  size_t n = jb->n, w = jb->cplx ? 2 : 1, nnz = 0;
  colcur a, b;
  for (int pass = 0; pass < 2; pass++) {
    if (pass) {
      jb->kcp = lvsi_malloc(ctx, (n + 1) * sizeof(size_t));
      jb->kri = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(size_t));
      jb->ka = lvsi_malloc(ctx, 2 * (nnz ? nnz : 1) * w * sizeof(double));
      if (!jb->kcp || !jb->kri || !jb->ka) return job_nomem(jb);
    }
    size_t q = 0;
    double *a0 = jb->ka, *a1 = jb->ka ? jb->ka + nnz * w : NULL;
    for (size_t j = 0; j < n; j++) {
      if (pass) jb->kcp[j] = q;
      cur_start(&a, jb->ph0, j);
      cur_start(&b, jb->pv, j);
      for (;;) {
        size_t ia = cur_row(&a), ib = cur_row(&b), i = ia < ib ? ia : ib;
        if (i == SIZE_MAX) break;
        double r0 = 0, i0 = 0, r1 = 0, i1 = 0;
        if (ia == i) cur_take(&a, &r0, &i0);
        if (ib == i) cur_take(&b, &r1, &i1);
        if (r0 == 0 && i0 == 0 && r1 == 0 && i1 == 0) continue; /* stored zeros */
        if (pass) {
          jb->kri[q] = i;
          a0[w * q] = r0;
          a1[w * q] = r1;
          if (w == 2) { a0[w * q + 1] = i0; a1[w * q + 1] = i1; }
        }
        q++;
      }
    }
    if (pass) jb->kcp[n] = q;
    nnz = q;
  }
  jb->md.krylov = jb->spec->method == LVS_SWEEP_KRYLOV ? 2 : 1;
  jb->md.knnz = nnz;
  jb->md.kcp = jb->kcp;
  jb->md.kri = jb->kri;
  jb->md.ka0 = jb->ka;
  jb->md.ka1 = jb->ka + nnz * w;
  return LVS_OK;
}

/* phase 2e: the path (the rule is in levelshift.h at lvs_sweep_method):
 * AUTO looks at the storage, size and true bandwidth of plain copies of H0
 * and V (O(nnz) for sparse ones), never at a dense copy */
static int model_choose(sweep_job *jb) {
  const lvs_sweep_spec *spec = jb->spec;
  size_t n = jb->n;
  int st;
  jb->auto_path = SWEEP_PATH_DENSE;
  if (!spec->family) {
    if ((st = lvs_matrix_visible(spec->h0, 0, &jb->ph0)) || (st = lvs_matrix_visible(spec->v, 0, &jb->pv))) return st;
    long k1 = lvsi_mat_bandwidth(jb->ph0), k2 = lvsi_mat_bandwidth(jb->pv), kd = k1 > k2 ? k1 : k2;
    int band_ok = !jb->cplx && n >= 16 && kd >= 1 && 4 * (size_t)kd <= n;
    int sparse = lvs_matrix_is_sparse(jb->ph0) && lvs_matrix_is_sparse(jb->pv);
    if (band_ok) jb->auto_path = SWEEP_PATH_BAND;
    else if (sparse && n > LVS_KRYLOV_MIN_DIM && 8 * jb->count <= n) jb->auto_path = SWEEP_PATH_KRYLOV;
  }
  static const int forced[] = {-1, SWEEP_PATH_DENSE, SWEEP_PATH_BAND, SWEEP_PATH_KRYLOV};
  jb->path = spec->method == LVS_SWEEP_AUTO ? jb->auto_path : forced[spec->method];
  return LVS_OK;
}

/* phase 2: the model each point is solved on */
static int model_setup(sweep_job *jb) {
  const lvs_sweep_spec *spec = jb->spec;
  int st;
  if ((st = model_choose(jb))) return st;
  jb->md = (model){jb->n, jb->count, jb->cplx, NULL, NULL, -1, NULL, NULL, spec->family, spec->family_ud,
                   0, NULL, NULL, NULL, 0, 0, NULL, NULL, NULL, NULL};
  if (jb->path == SWEEP_PATH_KRYLOV) return model_krylov(jb);
  lvs_matrix_free(jb->ph0);
  lvs_matrix_free(jb->pv);
  jb->ph0 = jb->pv = NULL;
  if ((st = model_dense(jb))) return st;
  jb->md.h0 = jb->h0a;
  jb->md.v = jb->va;
  if (jb->path == SWEEP_PATH_DENSE) return LVS_OK;
  if ((st = model_band(jb))) return st;
  return model_sectors(jb);
}

/* phase 3: the result object, energies NaN until tracked */
static int result_new(sweep_job *jb) {
  lvs_sweep *s = jb->s = lvsi_calloc(jb->ctx, 1, sizeof *s);
  if (!s) return job_nomem(jb);
  s->ctx = jb->ctx;
  s->n = jb->n;
  s->count = jb->count;
  s->npts = jb->npts;
  s->from = jb->spec->from;
  s->to = jb->spec->to;
  s->min_overlap = 1.0;
  s->method = jb->md.krylov ? LVS_SWEEP_KRYLOV : jb->md.kd >= 0 ? LVS_SWEEP_BAND : LVS_SWEEP_DENSE;
  s->e = lvsi_malloc(jb->ctx, jb->count * jb->npts * sizeof(double));
  if (!s->e) return job_nomem(jb);
  for (size_t q = 0; q < jb->count * jb->npts; q++) s->e[q] = NAN;
  return LVS_OK;
}

/* is point k this process's to compute (all of them unless a shard):
 * round-robin by point, on the Krylov path by run (warm starts) */
static int point_mine(const sweep_job *jb, size_t k) {
  const lvs_sweep_spec *spec = jb->spec;
  if (!spec->shards) return 1;
  size_t unit = jb->md.krylov ? k / LVS_SWEEP_KRYLOV_RUN : k;
  return unit % spec->shards == spec->shard - 1;
}

/* the journal's fingerprint of the sweep: sizes, grid, the model's
 * entries and, when it is not AUTO's, the path (its numbers differ) */
static uint64_t model_hash(const sweep_job *jb) {
  const lvs_sweep_spec *spec = jb->spec;
  size_t n = jb->n, w = jb->cplx ? 2 : 1;
  uint64_t h = FNV0;
  uint64_t hdr[4] = {n, jb->count, jb->steps, (uint64_t)jb->cplx};
  h = fnv(h, hdr, sizeof hdr);
  h = fnv(h, &spec->from, sizeof(double));
  h = fnv(h, &spec->to, sizeof(double));
  if (jb->md.krylov) {
    uint64_t tag[2] = {0x6b72796c6f76ULL, (uint64_t)jb->md.krylov}; /* "krylov", forced or not */
    h = fnv(h, tag, sizeof tag);
    h = fnv(h, jb->kcp, (n + 1) * sizeof(size_t));
    h = fnv(h, jb->kri, jb->md.knnz * sizeof(size_t));
    return fnv(h, jb->ka, 2 * jb->md.knnz * w * sizeof(double));
  }
  h = fnv(h, jb->h0a, n * n * w * sizeof(double));
  h = fnv(h, jb->va, n * n * w * sizeof(double));
  if (jb->path != jb->auto_path) {
    uint64_t tag = 0x70617468ULL + (uint64_t)jb->path;
    h = fnv(h, &tag, sizeof tag);
  }
  return h;
}

/* phase 4: the journal (own file plus, for whole runs, the part files of
 * shards), what it already holds, and the merge's completeness check */
static int journal_setup(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  const lvs_sweep_spec *spec = jb->spec;
  journal *jn = &jb->jn;
  shared_out *so = &jb->so;
  size_t n = jb->n, count = jb->count, npts = jb->npts;
  int st;
  if (spec->journal && *spec->journal) {
    jn->n = n;
    jn->count = count;
    jn->npts = npts;
    jn->cplx = jb->cplx;
    jn->hash = model_hash(jb);
    jn->recsize = 8 * (2 + count + n * count * (jb->cplx ? 2 : 1));
    if ((st = journal_open(ctx, jn, spec->journal, spec->shard, spec->shards, spec->merge_only))) return st;
    so->j = jn;
    /* remember the files to remove after the final write */
    jb->s->used = lvsi_calloc(ctx, (size_t)jn->nfiles + 1, sizeof(char *));
    if (!jb->s->used) return job_nomem(jb);
    for (int i = 0; i < jn->nfiles; i++)
      if (!(jb->s->used[i] = dupstr(ctx, jn->names[i]))) return job_nomem(jb);
    jb->rec = lvsi_malloc(ctx, jn->recsize);
    if (!jb->rec) return job_nomem(jb);
  }
  so->progress = spec->progress;
  so->progress_ud = spec->progress_ud;
  for (size_t k = 0; k < npts; k++) {
    if (!point_mine(jb, k)) continue;
    so->total++;
    if (so->j && jn->rec_file[k] >= 0) so->done++;
  }
  if (spec->merge_only && so->done < so->total) {
    for (size_t k = 0; k < npts; k++)
      if (jn->rec_file[k] < 0)
        return lvsi_fail(ctx, LVS_EINVAL,
                         "merge: %zu of %zu points are in no part file (first: point %zu, p = %.17g); "
                         "run the missing shards first",
                         so->total - so->done, so->total, k + 1, grid_p(spec->from, spec->to, jb->steps, k));
  }
  if (so->progress) so->progress(so->progress_ud, so->done, so->total);
  return LVS_OK;
}

/* energy scale for tolerances: largest |entry| of H at both ends */
static double energy_scale(const sweep_job *jb) {
  const lvs_sweep_spec *spec = jb->spec;
  double escale = 0;
  const double *h0 = jb->md.krylov ? jb->md.ka0 : jb->h0a, *v = jb->md.krylov ? jb->md.ka1 : jb->va;
  size_t len = (jb->md.krylov ? jb->md.knnz : jb->n * jb->n) * (jb->cplx ? 2 : 1); /* zeros add nothing */
  for (size_t i = 0; i < len; i++) {
    double a1 = fabs(h0[i] + spec->from * v[i]), a2 = fabs(h0[i] + spec->to * v[i]);
    if (spec->family) { a1 = fabs(h0[i]); a2 = fabs(v[i]); } /* H(from), H(to) */
    if (a1 > escale) escale = a1;
    if (a2 > escale) escale = a2;
  }
  return escale == 0 ? 1 : escale;
}

/* phase 5: block size (about 4 MB of vectors, reused, so few fresh pages;
 * at least one point per thread) and the buffers of points and tracking */
static int points_alloc(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  size_t n = jb->n, count = jb->count, nthreads = (size_t)jb->nthreads;
  int cplx = jb->cplx, st;
  size_t per = n * count * sizeof(double complex);
  size_t blk = (size_t)(4u << 20) / (per ? per : 1);
  if (blk < nthreads) blk = nthreads;
  if (jb->spec->family) { /* H(p_k) of a block held densely: about 64 MB */
    size_t hb = (size_t)(64u << 20) / (n * n * sizeof(double) * (cplx ? 2 : 1));
    if (hb < nthreads) hb = nthreads;
    if (blk > hb) blk = hb;
  }
  if (jb->md.krylov) { /* whole runs, at least one per thread */
    size_t runs = blk / LVS_SWEEP_KRYLOV_RUN;
    blk = LVS_SWEEP_KRYLOV_RUN * (runs > nthreads ? runs : nthreads);
  }
  if (blk > jb->npts) blk = jb->npts;
  jb->blk = blk;
  if ((st = lvsi_dense_ok(ctx, blk, n * count, sizeof(double complex), "sweep (vectors of a block)"))) return st;
  if (jb->spec->family) {
    if ((st = lvsi_dense_ok(ctx, blk, n * n * (cplx ? 2 : 1), sizeof(double), "sweep (H(p) of a block)"))) return st;
    if (!(jb->hbuf = lvsi_malloc(ctx, blk * n * n * (cplx ? 2 : 1) * sizeof(double)))) return job_nomem(jb);
  }
  jb->wblk = lvsi_malloc(ctx, blk * count * sizeof(double));
  jb->vblk = lvsi_malloc(ctx, blk * n * count * sizeof(double complex));
  jb->prev = lvsi_malloc(ctx, n * count * sizeof(double complex));
  jb->tmp = lvsi_malloc(ctx, n * count * sizeof(double complex));
  jb->work_d = lvsi_malloc(ctx, (count * count + 3 * (count + 1) + count) * sizeof(double));
  jb->pi = lvsi_malloc(ctx, count * sizeof(size_t));
  jb->perm = lvsi_malloc(ctx, count * sizeof(size_t));
  jb->iw = lvsi_malloc(ctx, 2 * (count + 1) * sizeof(size_t));
  jb->todo = lvsi_malloc(ctx, blk * sizeof(size_t));
  jb->cw = lvsi_malloc(ctx, count + 1);
  if (!jb->wblk || !jb->vblk || !jb->prev || !jb->tmp || !jb->work_d || !jb->pi || !jb->perm || !jb->iw ||
      !jb->todo || !jb->cw)
    return job_nomem(jb);
  jb->escale = energy_scale(jb);
  jb->degen_tol = 1e-10 * jb->escale;
  return LVS_OK;
}

/* phase 6b: sequential tracking through the block [k0, k1) */
static void track_block(sweep_job *jb, size_t k0, size_t k1) {
  size_t n = jb->n, count = jb->count, npts = jb->npts;
  lvs_sweep *s = jb->s;
  size_t *perm = jb->perm, *pi = jb->pi;
  double complex *prev = jb->prev;
  double *cost = jb->work_d, *hu = cost + count * count, *hv = hu + count + 1, *hmin = hv + count + 1,
         *norm2 = hmin + count + 1;
  for (size_t k = k0; k < k1; k++) {
    double *w = jb->wblk + (k - k0) * count;
    double complex *u = jb->vblk + (k - k0) * n * count;
    if (k == 0) {
      for (size_t a = 0; a < count; a++) perm[a] = a;
    } else {
      fix_degenerate(n, count, w, u, prev, jb->degen_tol, jb->tmp, norm2, jb->cw);
      for (size_t i = 0; i < count; i++)
        for (size_t j = 0; j < count; j++) {
          double c = -cabs(dotc(prev + i * n, u + j * n, n));
          cost[i * count + j] = isfinite(c) ? c : 0.0; /* the assignment needs finite costs */
        }
      hungarian(count, cost, pi, hu, hv, hmin, jb->iw, jb->iw + count + 1, jb->cw);
      /* pi maps previous column i to current column pi[i]; tracked level
       * a sat in previous column perm[a] */
      for (size_t a = 0; a < count; a++) {
        size_t i = perm[a], j = pi[i];
        double ov = -cost[i * count + j];
        if (ov < s->min_overlap) s->min_overlap = ov;
        perm[a] = j;
      }
      /* phase fix of the current vectors against their predecessors */
      for (size_t i = 0; i < count; i++) {
        size_t j = pi[i];
        double complex o = dotc(prev + i * n, u + j * n, n);
        double ao = cabs(o);
        if (ao > 0) {
          double complex f = conj(o) / ao;
          for (size_t r = 0; r < n; r++) u[j * n + r] *= f;
        }
      }
    }
    for (size_t a = 0; a < count; a++) s->e[a * npts + k] = w[perm[a]];
    memcpy(prev, u, n * count * sizeof *prev);
  }
}

/* A journalled point is reused only when it solves H(p) at its own p:
 * every value finite, and each level's residual |H(p) u - E u| within
 * SWEEP_RECORD_TOL of the point's scale (its largest |E| and |H u|). A
 * record with a valid checksum can still be forged, belong to another
 * family with the same end points (a sweep given as H(p) is known by H(from)
 * and H(to) only), or come from a machine whose BLAS rounds differently
 * (those pass: their residuals are rounding); this costs one product with
 * H(p) per level instead of a solve. */
#define SWEEP_RECORD_TOL 1e-6
static int verify_record(sweep_job *jb, size_t k, const double *w, const double complex *u) {
  lvs_ctx *ctx = jb->ctx;
  const model *md = &jb->md;
  size_t n = jb->n, count = jb->count;
  double p = grid_p(jb->spec->from, jb->spec->to, jb->steps, k);
  const char *file = jb->jn.names[jb->jn.rec_file[k]];
  for (size_t a = 0; a < count; a++)
    if (!isfinite(w[a])) goto bad;
  for (size_t q = 0; q < n * count; q++)
    if (!isfinite(creal(u[q])) || !isfinite(cimag(u[q]))) goto bad;
  double complex *y = lvsi_malloc(ctx, 2 * n * sizeof *y), *y1 = y + n;
  double *hd = NULL;
  if (!y) return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory checking a journal record");
  int st = LVS_OK;
  if (md->family) {
    size_t hlen = n * n * (md->cplx ? 2 : 1);
    if (!(hd = lvsi_malloc(ctx, hlen * sizeof *hd))) st = lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
    if (!st) st = family_at(ctx, md, p, hd);
  }
  double scale = 0, worst = 0;
  for (size_t a = 0; a < count && !st; a++) {
    const double complex *ua = u + a * n;
    if (md->family) {
      for (size_t i = 0; i < n; i++) y[i] = 0;
      for (size_t j = 0; j < n; j++)
        for (size_t i = 0; i < n; i++) {
          double complex h = md->cplx ? CMPLX(hd[2 * (i + j * n)], hd[2 * (i + j * n) + 1]) : hd[i + j * n];
          y[i] += h * ua[j];
        }
    } else {
      if ((st = lvs_matrix_apply(jb->spec->h0, 1, (const double *)ua, (double *)y))) break;
      if ((st = lvs_matrix_apply(jb->spec->v, 1, (const double *)ua, (double *)y1))) break;
      for (size_t i = 0; i < n; i++) y[i] += p * y1[i];
    }
    double r = 0, hy = 0;
    for (size_t i = 0; i < n; i++) {
      double complex d = y[i] - w[a] * ua[i];
      r += creal(d) * creal(d) + cimag(d) * cimag(d);
      hy += creal(y[i]) * creal(y[i]) + cimag(y[i]) * cimag(y[i]);
    }
    scale = fmax(scale, fmax(fabs(w[a]), sqrt(hy)));
    worst = fmax(worst, sqrt(r));
  }
  lvsi_free(ctx, y);
  lvsi_free(ctx, hd);
  if (st) return st;
  if (worst <= SWEEP_RECORD_TOL * (scale > 0 ? scale : 1.0)) return LVS_OK;
  return lvsi_fail(ctx, LVS_EINVAL,
                   "journal '%s': the record of point %zu (p = %.17g) does not solve H(p) there (residual %.3g of %.3g):"
                   " a forged record or one of another model; remove the file to start anew",
                   file, k + 1, p, worst, scale);
bad:
  return lvsi_fail(ctx, LVS_EINVAL,
                   "journal '%s': the record of point %zu (p = %.17g) holds a NaN or infinite value; remove the file to"
                   " start anew",
                   file, k + 1, p);
}

/* phase 6a: the points of block [k0, k1) from the journal or computed */
static int block_points(sweep_job *jb, size_t k0, size_t k1) {
  lvs_ctx *ctx = jb->ctx;
  const lvs_sweep_spec *spec = jb->spec;
  size_t n = jb->n, count = jb->count, ntodo = 0;
  int st;
  for (size_t k = k0; k < k1; k++) {
    if (!point_mine(jb, k)) continue;
    if (jb->so.j && jb->jn.rec_file[k] >= 0) {
      if (spec->shards && !jb->md.krylov) continue; /* a shard only adds to its part */
      /* (on the Krylov path a resumed shard reads it: the next point starts from it) */
      if ((st = load_record(ctx, &jb->jn, k, jb->wblk + (k - k0) * count, jb->vblk + (k - k0) * n * count, jb->rec)) ||
          (st = verify_record(jb, k, jb->wblk + (k - k0) * count, jb->vblk + (k - k0) * n * count)))
        return st;
    } else {
      jb->todo[ntodo++] = k;
    }
  }
  size_t hlen = n * n * (jb->cplx ? 2 : 1);
  if (jb->md.family)
    for (size_t t = 0; t < ntodo; t++)
      if ((st = family_at(ctx, &jb->md, grid_p(spec->from, spec->to, jb->steps, jb->todo[t]),
                          jb->hbuf + (jb->todo[t] - k0) * hlen)))
        return st;
  worker tmpl = {&jb->md, spec->from, spec->to, jb->steps, k0, jb->todo, ntodo, jb->md.family ? jb->hbuf : NULL,
                 hlen, jb->wblk, jb->vblk, 0, 1, &jb->la, ctx->dense_cap, &jb->so, LVS_OK, {0}, ctx->fence};
  st = run_workers(ctx, &tmpl, jb->nthreads);
  journal *jn = jb->so.j; /* the block's records on disk before it is tracked */
  if (!st && jn && jn->fd >= 0 && ntodo && fdatasync(jn->fd) != 0)
    st = lvsi_fail(ctx, LVS_EINVAL, "cannot write journal '%s': %s", jn->own, strerror(errno));
  if (jn) jn->synced = lvs_monotonic();
  return st;
}

/* phase 6: every point, block by block, each block tracked after it is
 * complete (a shard only computes its points into its part file) */
static int points_run(sweep_job *jb) {
  int st = LVS_OK;
  /* one BLAS thread always: no oversubscription, and OpenBLAS's own
   * threading would make the rounding depend on the thread count */
  jb->blas_threads = lvsi_blas_threads(); /* OpenBLAS thread control: lazyla.c */
  if (jb->blas_threads > 0) {
    lvsi_set_blas_threads(1);
    /* OpenBLAS's idle pool threads spin (sched_yield) for about 2^28 cycles
     * after start-up or their last job, taking a core from the workers (25%
     * of a 2-core sweep, measured with perf); stopping the pool lets the
     * workers have the cores. OpenBLAS starts it again on its next threaded
     * call (its fork handler uses the same entry). */
    if (jb->nthreads > 1 && jb->blas_threads > 1) lvsi_blas_pool_stop();
  }
  for (size_t k0 = 0; k0 < jb->npts && !st; k0 += jb->blk) {
    size_t k1 = k0 + jb->blk < jb->npts ? k0 + jb->blk : jb->npts;
    st = block_points(jb, k0, k1);
    if (!st && !jb->spec->shards) track_block(jb, k0, k1);
  }
  if (jb->blas_threads > 0) {
    lvsi_set_blas_threads(jb->blas_threads);
    jb->blas_threads = 0;
  }
  return st;
}

/* phase 7: levels exactly degenerate at `from` come out of LAPACK in no
 * particular order: number them by their energies at the next grid point,
 * so that "level a is the a-th lowest at from" also holds just after from */
static void number_degenerate_start(sweep_job *jb) {
  size_t count = jb->count, npts = jb->npts;
  double *e = jb->s->e;
  if (npts < 2) return;
  for (size_t a = 0; a < count;) {
    size_t b = a + 1;
    while (b < count && fabs(e[b * npts] - e[a * npts]) <= jb->degen_tol) b++;
    for (size_t i = a + 1; i < b; i++) /* insertion sort of rows a..b-1 by e at k = 1 */
      for (size_t j = i; j > a && e[j * npts + 1] < e[(j - 1) * npts + 1]; j--)
        for (size_t k = 0; k < npts; k++) {
          double t = e[j * npts + k];
          e[j * npts + k] = e[(j - 1) * npts + k];
          e[(j - 1) * npts + k] = t;
        }
    a = b;
  }
}

/* Krylov path: Brent's minimization (parabolic interpolation safeguarded by
 * golden-section steps; R. P. Brent, Algorithms for Minimization without
 * Derivatives, 1973, ch. 5, procedure localmin) of the gap on [a, b] from
 * the grid's (x, fx), to SWEEP_KRYLOV_PTOL |to - from|: a smooth minimum in
 * a handful of solves instead of golden section's ~30, each solve being a
 * Lanczos run. It stops once a gap is at or below ctol (a true crossing is
 * then established): closer to the crossing the two levels agree to
 * rounding, and a single-vector Lanczos run can return such a pair once
 * (when a symmetry the sparsity does not show separates them). */
static int brent_gap(sweep_job *jb, size_t r, double a, double b, double x, double fx, const double *g3,
                     double ctol, gap_warm *gw, double *best_p, double *best_g) {
  lvs_ctx *ctx = jb->ctx;
  double *wg = jb->work_d + jb->count * jb->count;
  const double c = (3 - sqrt(5.0)) / 2, eps = 1e-12;
  /* a true crossing is a V, |slope| |p - p_c|, with the slope of the grid's
   * gaps: locate it to a tenth of ctol / slope, so that its gap falls below
   * ctol (and the search stops there) */
  double h = 0.5 * (b - a), slope = fmax(fabs(g3[0] - g3[1]), fabs(g3[2] - g3[1])) / h;
  double tabs = SWEEP_KRYLOV_PTOL * fabs(jb->s->to - jb->s->from);
  if (slope > 0 && 0.1 * ctol / slope < tabs) tabs = 0.1 * ctol / slope;
  double v = x, w = x, fv = fx, fw = fx, d = 0, e = 0;
  int st = LVS_OK;
  for (int it = 0; it < 100 && fx > ctol; it++) {
    double m = 0.5 * (a + b), tol1 = eps * fabs(x) + tabs / 3, t2 = 2 * tol1;
    if (fabs(x - m) <= t2 - 0.5 * (b - a)) break;
    double pp = 0, q = 0, rr = 0;
    if (fabs(e) > tol1) { /* parabola through (v, fv), (w, fw), (x, fx) */
      rr = (x - w) * (fx - fv);
      q = (x - v) * (fx - fw);
      pp = (x - v) * q - (x - w) * rr;
      q = 2 * (q - rr);
      if (q > 0) pp = -pp;
      else q = -q;
      rr = e;
      e = d;
    }
    if (fabs(pp) < fabs(0.5 * q * rr) && pp > q * (a - x) && pp < q * (b - x)) {
      d = pp / q;
      double u = x + d;
      if (u - a < t2 || b - u < t2) d = x < m ? tol1 : -tol1;
    } else {
      e = (x < m ? b : a) - x;
      d = c * e;
    }
    double u = x + (fabs(d) >= tol1 ? d : (d > 0 ? tol1 : -tol1)), fu;
    if ((st = gap_at(ctx, &jb->md, u, r, wg, &fu, gw))) return st;
    if (fu <= fx) {
      if (u < x) b = x;
      else a = x;
      v = w; fv = fw; w = x; fw = fx; x = u; fx = fu;
    } else {
      if (u < x) a = u;
      else b = u;
      if (fu <= fw || w == x) { v = w; fv = fw; w = u; fw = fu; }
      else if (fu <= fv || v == x || v == w) { v = u; fv = fu; }
    }
  }
  *best_p = x;
  *best_g = fx < 0 ? 0 : fx;
  return st;
}

/* dE/dp = <u|V|u> for a normalized eigenvector u of H(p) (Hellmann-Feynman;
 * R. P. Feynman, Phys. Rev. 56, 340 (1939)), V on the union pattern */
static double hf_slope(const model *md, const double complex *u) {
  double acc = 0;
  for (size_t j = 0; j < md->n; j++)
    for (size_t q = md->kcp[j]; q < md->kcp[j + 1]; q++) {
      double complex v = md->cplx ? md->ka1[2 * q] + I * md->ka1[2 * q + 1] : md->ka1[q];
      acc += creal(conj(u[md->kri[q]]) * v * u[j]);
    }
  return acc;
}

/* Krylov path, before Brent: at a true crossing the gap is a V, |d(p)|
 * with d smooth, so Newton's step x - g/g' (g' = difference of the two
 * levels' Hellmann-Feynman slopes) lands on it to second order. From the
 * grid point x = p_k: at most three steps, each kept only inside (a, b) and
 * while it at least halves the gap (an avoided crossing fails that at
 * once). *x, *fx: the best point so far (for brent_gap to go on from). */
static int newton_gap(sweep_job *jb, size_t r, double a, double b, double ctol, gap_warm *gw, double *x, double *fx) {
  lvs_ctx *ctx = jb->ctx;
  const model *md = &jb->md;
  double *wg = jb->work_d + jb->count * jb->count, xc = *x, g;
  int st = gap_at(ctx, md, xc, r, wg, &g, gw);
  if (st) return st;
  *fx = g;
  for (int it = 0; it < 3 && g > ctol; it++) {
    const double complex *u = gw->vp; /* the vectors just computed */
    double gp = hf_slope(md, u + (r + 1) * md->n) - hf_slope(md, u + r * md->n);
    if (!(gp != 0)) break;
    double xn = xc - g / gp, gn;
    if (!(xn > a && xn < b)) break;
    if ((st = gap_at(ctx, md, xn, r, wg, &gn, gw))) return st;
    if (gn < *fx) { *fx = gn; *x = xn; }
    if (!(gn <= 0.5 * g)) break;
    xc = xn;
    g = gn;
  }
  return LVS_OK;
}

/* golden-section search for the smallest gap between ranks r and r+1 of
 * H(p) on [p_{k-1}, p_{k+1}], starting from the grid's (p_k, g_k) (the
 * Krylov path: newton_gap, then brent_gap) */
static int refine_gap(sweep_job *jb, size_t k, size_t r, const double *g3, double ctol, double *best_p,
                      double *best_g) {
  double gk = g3[1];
  lvs_ctx *ctx = jb->ctx;
  const model *md = &jb->md;
  double *wg = jb->work_d + jb->count * jb->count; /* count + 1 >= r + 2 values */
  const double gr = (sqrt(5.0) - 1) / 2;
  double a = grid_p(jb->s->from, jb->s->to, jb->steps, k - 1), b = grid_p(jb->s->from, jb->s->to, jb->steps, k + 1);
  double bp = grid_p(jb->s->from, jb->s->to, jb->steps, k), bg = gk;
  double x1 = b - gr * (b - a), x2 = a + gr * (b - a), f1, f2;
  int st;
  gap_warm gwb = {{0}, NULL, NULL, 1}, *gw = NULL;
  if (md->krylov) {
    gw = &gwb;
    gw->vc = lvsi_malloc(ctx, 2 * jb->n * (r + 2) * sizeof(double complex));
    if (!gw->vc) return job_nomem(jb);
    gw->vp = gw->vc + jb->n * (r + 2);
  }
  double complex *vbuf = gwb.vc;
  lvs_clear_error(ctx);
  if (md->krylov) {
    double x = bp, fx = bg;
    st = newton_gap(jb, r, a, b, ctol, gw, &x, &fx);
    if (!st && fx <= ctol) {
      *best_p = x;
      *best_g = fx < 0 ? 0 : fx;
    } else if (!st) {
      st = brent_gap(jb, r, a, b, x, fx, g3, ctol, gw, best_p, best_g);
    }
    goto out;
  }
  if ((st = gap_at(ctx, md, x1, r, wg, &f1, gw)) || (st = gap_at(ctx, md, x2, r, wg, &f2, gw))) goto out;
  for (int it = 0; it < 200 && fabs(b - a) > 1e-15 * (fabs(a) + fabs(b)) + 1e-300; it++) {
    if (f1 <= f2) {
      b = x2; x2 = x1; f2 = f1;
      x1 = b - gr * (b - a);
      if ((st = gap_at(ctx, md, x1, r, wg, &f1, gw))) goto out;
    } else {
      a = x1; x1 = x2; f1 = f2;
      x2 = a + gr * (b - a);
      if ((st = gap_at(ctx, md, x2, r, wg, &f2, gw))) goto out;
    }
  }
  if (f1 < bg) { bg = f1; bp = x1; }
  if (f2 < bg) { bg = f2; bp = x2; }
  *best_p = bp;
  *best_g = bg < 0 ? 0 : bg;
out:
  band_scratch_free(ctx, &gwb.bs);
  lvsi_free(ctx, vbuf);
  return st;
}

/* phase 8: crossings, the local minima of adjacent gaps over the grid,
 * refined; rank r at point k is the tracked level with the r-th smallest
 * energy there (ties by level number), from sorted copies of points k-1,
 * k, k+1 */
static int find_crossings(sweep_job *jb) {
  lvs_sweep *s = jb->s;
  size_t count = jb->count, npts = jb->npts;
  if (npts < 3 || count < 2) return LVS_OK;
  ranked *srt = jb->srt = lvsi_malloc(jb->ctx, 3 * count * sizeof *srt);
  if (!srt) return job_nomem(jb);
  double scale = 0;
  for (size_t q = 0; q < count * npts; q++)
    if (fabs(s->e[q]) > scale) scale = fabs(s->e[q]);
  if (scale == 0) scale = jb->escale;
  double dtol = 1e-12 * scale, ctol = 1e-9 * scale;
  int st;
  for (size_t k = 1; k + 1 < npts; k++) {
    for (int d = 0; d < 3; d++) {
      ranked *S = srt + (size_t)d * count;
      for (size_t a = 0; a < count; a++) {
        S[a].e = s->e[a * npts + k - 1 + (size_t)d];
        S[a].a = a;
      }
      qsort(S, count, sizeof *S, cmp_ranked);
    }
    for (size_t r = 0; r + 1 < count; r++) {
      double g[3];
      for (int d = 0; d < 3; d++) g[d] = srt[(size_t)d * count + r + 1].e - srt[(size_t)d * count + r].e;
      if (!(g[1] < g[0] - dtol && g[1] <= g[2] + dtol)) continue;
      lvs_sweep_crossing c;
      if ((st = refine_gap(jb, k, r, g, ctol, &c.at, &c.gap))) return st;
      size_t i = srt[count + r].a, j = srt[count + r + 1].a;
      c.i = i < j ? i : j;
      c.j = i < j ? j : i;
      c.avoided = c.gap > ctol;
      if ((st = add_crossing(s, &jb->ccap, &c))) return st;
    }
  }
  if (s->ncross > 1) qsort(s->cross, s->ncross, sizeof *s->cross, cmp_cross);
  return LVS_OK;
}

static void job_free(sweep_job *jb) {
  lvs_ctx *ctx = jb->ctx;
  if (jb->blas_threads > 0) lvsi_set_blas_threads(jb->blas_threads);
  journal_close(ctx, &jb->jn);
  lvs_matrix_free(jb->ph0);
  lvs_matrix_free(jb->pv);
  void *bufs[] = {jb->kcp, jb->kri, jb->ka, jb->h0a, jb->va, jb->bandst, jb->seccomp, jb->secoff, jb->secs, jb->secband, jb->hbuf,
                  jb->wblk, jb->vblk, jb->prev, jb->tmp, jb->work_d, jb->pi, jb->perm, jb->iw,
                  jb->todo, jb->cw, jb->srt, jb->rec};
  for (size_t i = 0; i < sizeof bufs / sizeof bufs[0]; i++) lvsi_free(ctx, bufs[i]);
  pthread_mutex_destroy(&jb->la.mu);
  pthread_mutex_destroy(&jb->so.mu);
}

/* The phases in order: spec checks, model setup, result, journal
 * open/resume, points computed and tracked block by block, numbering at
 * `from`, crossings, series. A shard stops after its points. */
int lvs_sweep_new(lvs_ctx *ctx, const lvs_sweep_spec *spec, lvs_sweep **out) {
  if (out) *out = NULL;
  if (!ctx || !out) return LVS_EINVAL;
  int st = spec_check(ctx, spec);
  if (st) return st;
  sweep_job jb;
  memset(&jb, 0, sizeof jb);
  jb.ctx = ctx;
  jb.spec = spec;
  jb.n = lvs_matrix_rows(spec->h0);
  jb.count = spec->count;
  jb.steps = spec->steps;
  jb.npts = spec->steps + 1;
  jb.cplx = lvs_matrix_is_complex(spec->h0) || lvs_matrix_is_complex(spec->v);
  jb.nthreads = spec->threads ? spec->threads : 2;
  jb.la.f = ctx->alloc;
  jb.la.ud = ctx->ud;
  pthread_mutex_init(&jb.la.mu, NULL);
  jb.jn.fd = -1;
  pthread_mutex_init(&jb.so.mu, NULL);
  if ((st = model_setup(&jb)) || (st = result_new(&jb)) || (st = journal_setup(&jb)) || (st = points_alloc(&jb)) ||
      (st = points_run(&jb)))
    goto fail;
  if (spec->shards) {
    jb.s->partial = 1;
    jb.s->done = jb.so.done;
  } else {
    number_degenerate_start(&jb);
    if ((st = find_crossings(&jb))) goto fail;
    if (spec->series_order > 0 && (st = add_series(jb.s, spec))) goto fail;
  }
  *out = jb.s;
  jb.s = NULL;
  job_free(&jb);
  return LVS_OK;
fail:
  lvs_sweep_free(jb.s);
  job_free(&jb);
  return st;
}

size_t lvs_sweep_points(const lvs_sweep *s) { return s->npts; }
size_t lvs_sweep_count(const lvs_sweep *s) { return s->count; }
double lvs_sweep_param(const lvs_sweep *s, size_t k) {
  return k < s->npts ? grid_p(s->from, s->to, s->npts - 1, k) : NAN;
}
const double *lvs_sweep_level(const lvs_sweep *s, size_t level) {
  return level < s->count ? s->e + level * s->npts : NULL;
}
const double *lvs_sweep_series(const lvs_sweep *s, size_t level) {
  return s->ser && level < s->count ? s->ser + level * s->npts : NULL;
}
int lvs_sweep_series_order(const lvs_sweep *s) { return s->series_order; }
size_t lvs_sweep_ncrossings(const lvs_sweep *s) { return s->ncross; }
const lvs_sweep_crossing *lvs_sweep_crossing_at(const lvs_sweep *s, size_t k) {
  return k < s->ncross ? &s->cross[k] : NULL;
}
double lvs_sweep_min_overlap(const lvs_sweep *s) { return s->min_overlap; }
int lvs_sweep_path(const lvs_sweep *s) { return s->method; }
int lvs_sweep_is_partial(const lvs_sweep *s, size_t *done) {
  if (done) *done = s->done;
  return s->partial;
}

int lvs_sweep_remove_journals(lvs_sweep *s) {
  if (!s->used) return LVS_OK;
  for (size_t i = 0; s->used[i]; i++)
    if (remove(s->used[i]) != 0 && errno != ENOENT)
      return lvsi_fail(s->ctx, LVS_EINVAL, "cannot remove journal '%s': %s", s->used[i], strerror(errno));
  free_used(s->ctx, s->used);
  s->used = NULL;
  return LVS_OK;
}

int lvs_sweep_set_labels(lvs_sweep *s, const char *param, const char *param_unit, const char *energy_unit) {
  lvs_ctx *ctx = s->ctx;
  const char *in[3] = {param, param_unit, energy_unit};
  char **dst[3] = {&s->pname, &s->punit, &s->eunit};
  for (int i = 0; i < 3; i++) {
    if (!in[i]) continue;
    for (const char *c = in[i]; *c; c++)
      if (*c == '\n' || *c == '\r' || *c == ',' || *c == '"' || *c == '\\')
        return lvsi_fail(ctx, LVS_EINVAL, "labels may not hold newlines, commas, quotes or backslashes: '%s'", in[i]);
    char *d = dupstr(ctx, in[i]);
    if (!d) return lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
    lvsi_free(ctx, *dst[i]);
    *dst[i] = d;
  }
  return LVS_OK;
}

/* ---- writers ----------------------------------------------------------------- */
static int ends_with(const char *s, const char *suf) {
  size_t a = strlen(s), b = strlen(suf);
  return a >= b && strcmp(s + a - b, suf) == 0;
}

int lvs_sweep_write(const lvs_sweep *s, const char *path) {
  lvs_ctx *ctx = s->ctx;
  if (!path || !*path) return lvsi_fail(ctx, LVS_EINVAL, "write needs a file path");
  if (s->partial) return lvsi_fail(ctx, LVS_EINVAL, "a shard has only part of the points: merge the parts first");
  if (ends_with(path, ".json"))
    return lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s': the core writes CSV; JSON is written by the Lua layer "
                     "(sw:write) through a JSON library", path);
  char *buf = NULL;
  size_t len = 0;
  FILE *f = open_memstream(&buf, &len);
  if (!f) return lvsi_fail(ctx, LVS_ENOMEM, "sweep write: out of memory");
  size_t npts = s->npts, count = s->count;
  const char *pn = s->pname ? s->pname : "p";
  char about[600];
  lvs_sweep_about(s, about, sizeof about);
  fprintf(f, "# %s\n%s", about, pn);
  for (size_t a = 0; a < count; a++) fprintf(f, ",E%zu", a + 1);
  if (s->ser)
    for (size_t a = 0; a < count; a++) fprintf(f, ",E%zu_series", a + 1);
  fputc('\n', f);
  for (size_t k = 0; k < npts; k++) {
    fprintf(f, "%.17g", lvs_sweep_param(s, k));
    for (size_t a = 0; a < count; a++) fprintf(f, ",%.17g", s->e[a * npts + k]);
    if (s->ser)
      for (size_t a = 0; a < count; a++) fprintf(f, ",%.17g", s->ser[a * npts + k]);
    fputc('\n', f);
  }
  int bad = ferror(f);
  if (fclose(f) != 0) bad = 1;
  int st = bad ? lvsi_fail(ctx, LVS_ENOMEM, "sweep write: out of memory") : lvs_write_file(ctx, path, buf, len);
  free(buf);
  return st;
}

/* the model and units line of the written files */
void lvs_sweep_about(const lvs_sweep *s, char *about, size_t size) {
  const char *pn = s->pname ? s->pname : "p";
  if (!about || !size) return;
  int l = snprintf(about, size, "H(%s) = H0 + %s V", pn, pn);
  if (l < 0 || (size_t)l >= size) return;
  if (s->punit && *s->punit) l += snprintf(about + l, size - (size_t)l, "; %s in %s", pn, s->punit);
  if ((size_t)l >= size) return;
  if (s->eunit && *s->eunit) l += snprintf(about + l, size - (size_t)l, "; energies in %s", s->eunit);
  else l += snprintf(about + l, size - (size_t)l, "; energies in the model's units");
  if ((size_t)l >= size) return;
  if (s->ser)
    snprintf(about + l, size - (size_t)l, "; E<k>_series: Rayleigh-Schroedinger series to order %d",
             s->series_order);
}

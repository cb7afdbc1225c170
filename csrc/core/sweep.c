/* sweep.c -- levels of H(p) = H0 + p V along a uniform grid of p, tracked by
 * eigenvector overlap, with avoided and true crossings located.
 *
 * Points. p_k = from + (to - from) k / steps, k = 0..steps; the lowest
 * `count` eigenpairs of H(p_k) come from lvs_eigen. Points are independent,
 * so they are computed by `threads` POSIX threads (point k by thread
 * k mod threads, in blocks); every point runs the same code on the same
 * input, so the numbers do not depend on the thread count. Each worker has
 * its own context whose allocator is the caller's allocator behind a mutex
 * (a memory cap set by an embedding host keeps holding).
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
 * Not done yet: step refinement where overlaps drop (METHODS 5), levels
 * entering the window from above when count < dim are tracked as best the
 * overlaps allow; the smallest accepted overlap is kept (lvs_sweep_min_overlap)
 * so a caller can tell adiabatic from diabatic following.
 */
#include <complex.h>
#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

#define SWEEP_MAX_STEPS 1000000
#define SWEEP_MAX_THREADS 64

struct lvs_sweep {
  lvs_ctx *ctx;
  size_t n, count, npts;
  double from, to;
  double *e;   /* tracked energies: e[a * npts + k] */
  lvs_sweep_crossing *cross;
  size_t ncross;
  double min_overlap;
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
} model;

static double grid_p(double from, double to, size_t steps, size_t k) {
  if (k == steps) return to;
  return from + (to - from) * (double)k / (double)steps;
}

/* lowest m energies of H(p) (and vectors as complex n x m when vec != NULL) */
static int solve_point(lvs_ctx *tctx, const model *md, double p, size_t m, double *w,
                       double complex *vec) {
  size_t n = md->n;
  lvs_matrix *h = NULL, *u = NULL;
  int st = lvs_matrix_new(tctx, n, n, md->cplx, &h);
  if (st) return st;
  double *a = lvs_matrix_data(h);
  size_t len = n * n * (md->cplx ? 2 : 1);
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

/* ---- workers ---------------------------------------------------------------- */
typedef struct {
  const model *md;
  double from, to;
  size_t steps;
  size_t k0, k1;   /* block of points [k0, k1) */
  double *w;       /* (k - k0) * count */
  double complex *vec; /* (k - k0) * n * count */
  int tid, nthreads;
  locked_alloc *la;
  size_t dense_cap;
  int st;
  char msg[512];
} worker;

static void *work(void *arg) {
  worker *wk = arg;
  const model *md = wk->md;
  wk->st = LVS_OK;
  lvs_ctx *tctx = lvs_ctx_new(locked_alloc_fn, wk->la);
  if (!tctx) {
    wk->st = LVS_ENOMEM;
    snprintf(wk->msg, sizeof wk->msg, "sweep: out of memory for a worker context");
    return NULL;
  }
  lvs_ctx_set_dense_cap(tctx, wk->dense_cap);
  for (size_t k = wk->k0 + (size_t)wk->tid; k < wk->k1; k += (size_t)wk->nthreads) {
    double p = grid_p(wk->from, wk->to, wk->steps, k);
    int st = solve_point(tctx, md, p, md->count, wk->w + (k - wk->k0) * md->count,
                         wk->vec + (k - wk->k0) * md->n * md->count);
    if (st) {
      wk->st = st;
      snprintf(wk->msg, sizeof wk->msg, "at p = %.17g: %s", p, lvs_errmsg(tctx));
      break;
    }
  }
  lvs_ctx_free(tctx);
  return NULL;
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

static double complex dotc(const double complex *a, const double complex *b, size_t n) {
  double complex s = 0;
  for (size_t i = 0; i < n; i++) s += conj(a[i]) * b[i];
  return s;
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
static int gap_at(lvs_ctx *ctx, const model *md, double p, size_t r, double *w, double *g) {
  int st = solve_point(ctx, md, p, r + 2, w, NULL);
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
void lvs_sweep_free(lvs_sweep *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  lvsi_free(ctx, s->e);
  lvsi_free(ctx, s->cross);
  lvsi_free(ctx, s);
}

int lvs_sweep_new(lvs_ctx *ctx, const lvs_sweep_spec *spec, lvs_sweep **out) {
  if (out) *out = NULL;
  if (!ctx || !out) return LVS_EINVAL;
  if (!spec || !spec->h0 || !spec->v)
    return lvsi_fail(ctx, LVS_EINVAL, "sweep needs H0 and V");
  const lvs_matrix *h0 = spec->h0, *v = spec->v;
  int st;
  if ((st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, "H0"))) return st;
  if ((st = lvsi_check_hermitian(v, LVS_DEFAULT_HERM_TOL, "V"))) return st;
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

  size_t count = spec->count, steps = spec->steps, npts = steps + 1;
  int cplx = lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v);
  if ((st = lvsi_dense_ok(ctx, count, npts, sizeof(double), "sweep (energies)"))) return st;

  lvs_sweep *s = NULL;
  lvs_matrix *dh = NULL, *dv = NULL;
  double *h0a = NULL, *va = NULL, *wblk = NULL, *work_d = NULL;
  double complex *vblk = NULL, *prev = NULL, *tmp = NULL;
  size_t *pi = NULL, *perm = NULL, *iw = NULL;
  char *cw = NULL;
  ranked *srt = NULL;
  size_t ccap = 0;
  locked_alloc la;
  la.f = ctx->alloc;
  la.ud = ctx->ud;
  pthread_mutex_init(&la.mu, NULL);

  /* dense copies of the visible blocks, both of the common kind */
  {
    if ((st = lvs_matrix_visible(h0, 1, &dh))) goto fail;
    if ((st = lvs_matrix_visible(v, 1, &dv))) goto fail;
    size_t len = n * n * (cplx ? 2 : 1);
    h0a = lvsi_malloc(ctx, len * sizeof(double));
    va = lvsi_malloc(ctx, len * sizeof(double));
    if (!h0a || !va) goto nomem;
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double re, im;
        size_t at = j * n + i;
        lvs_matrix_get(dh, i, j, &re, &im);
        if (cplx) { h0a[2 * at] = re; h0a[2 * at + 1] = im; } else h0a[at] = re;
        lvs_matrix_get(dv, i, j, &re, &im);
        if (cplx) { va[2 * at] = re; va[2 * at + 1] = im; } else va[at] = re;
      }
    lvs_matrix_free(dh);
    lvs_matrix_free(dv);
    dh = dv = NULL;
  }
  model md = {n, count, cplx, h0a, va};

  s = lvsi_calloc(ctx, 1, sizeof *s);
  if (!s) goto nomem;
  s->ctx = ctx;
  s->n = n;
  s->count = count;
  s->npts = npts;
  s->from = spec->from;
  s->to = spec->to;
  s->min_overlap = 1.0;
  s->e = lvsi_malloc(ctx, count * npts * sizeof(double));
  if (!s->e) goto nomem;

  /* block size: about 32 MB of vectors, at least one point per thread */
  size_t per = n * count * sizeof(double complex);
  size_t blk = (size_t)(32u << 20) / (per ? per : 1);
  if (blk < (size_t)nthreads) blk = (size_t)nthreads;
  if (blk > npts) blk = npts;
  if ((st = lvsi_dense_ok(ctx, blk, n * count, sizeof(double complex), "sweep (vectors of a block)")))
    goto fail;
  wblk = lvsi_malloc(ctx, blk * count * sizeof(double));
  vblk = lvsi_malloc(ctx, blk * n * count * sizeof(double complex));
  prev = lvsi_malloc(ctx, n * count * sizeof(double complex));
  tmp = lvsi_malloc(ctx, n * count * sizeof(double complex));
  work_d = lvsi_malloc(ctx, (count * count + 3 * (count + 1) + count) * sizeof(double));
  pi = lvsi_malloc(ctx, count * sizeof(size_t));
  perm = lvsi_malloc(ctx, count * sizeof(size_t));
  iw = lvsi_malloc(ctx, 2 * (count + 1) * sizeof(size_t));
  cw = lvsi_malloc(ctx, count + 1);
  if (!wblk || !vblk || !prev || !tmp || !work_d || !pi || !perm || !iw || !cw) goto nomem;
  double *cost = work_d, *hu = cost + count * count, *hv = hu + count + 1, *hmin = hv + count + 1,
         *norm2 = hmin + count + 1;

  /* energy scale for tolerances: largest |entry| of H at both ends */
  double escale = 0;
  {
    size_t len = n * n * (cplx ? 2 : 1);
    for (size_t i = 0; i < len; i++) {
      double a1 = fabs(h0a[i] + spec->from * va[i]), a2 = fabs(h0a[i] + spec->to * va[i]);
      if (a1 > escale) escale = a1;
      if (a2 > escale) escale = a2;
    }
    if (escale == 0) escale = 1;
  }
  double degen_tol = 1e-10 * escale;

  worker wk[SWEEP_MAX_THREADS];
  pthread_t th[SWEEP_MAX_THREADS];
  for (size_t k0 = 0; k0 < npts; k0 += blk) {
    size_t k1 = k0 + blk < npts ? k0 + blk : npts;
    int nt = nthreads;
    if ((size_t)nt > k1 - k0) nt = (int)(k1 - k0);
    for (int t = 0; t < nt; t++) {
      wk[t] = (worker){&md, spec->from, spec->to, steps, k0, k1, wblk, vblk, t, nt, &la,
                       ctx->dense_cap, LVS_OK, {0}};
    }
    int started = 0;
    for (int t = 1; t < nt; t++) {
      if (pthread_create(&th[t], NULL, work, &wk[t]) != 0) break;
      started = t;
    }
    /* threads that could not start: their points are done here */
    if (started < nt - 1) {
      for (int t = started + 1; t < nt; t++) work(&wk[t]);
    }
    work(&wk[0]);
    for (int t = 1; t <= started; t++) pthread_join(th[t], NULL);
    for (int t = 0; t < nt; t++)
      if (wk[t].st) {
        st = lvsi_fail(ctx, wk[t].st, "%s", wk[t].msg);
        goto fail;
      }
    /* sequential tracking through the block */
    for (size_t k = k0; k < k1; k++) {
      double *w = wblk + (k - k0) * count;
      double complex *u = vblk + (k - k0) * n * count;
      if (k == 0) {
        for (size_t a = 0; a < count; a++) perm[a] = a;
      } else {
        fix_degenerate(n, count, w, u, prev, degen_tol, tmp, norm2, cw);
        for (size_t i = 0; i < count; i++)
          for (size_t j = 0; j < count; j++) cost[i * count + j] = -cabs(dotc(prev + i * n, u + j * n, n));
        hungarian(count, cost, pi, hu, hv, hmin, iw, iw + count + 1, cw);
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

  /* crossings: local minima of adjacent gaps over the grid, refined */
  if (npts >= 3 && count >= 2) {
    /* rank r at point k is the tracked level with the r-th smallest energy
     * there (ties by level number); sorted copies of points k-1, k, k+1 */
    srt = lvsi_malloc(ctx, 3 * count * sizeof *srt);
    if (!srt) goto nomem;
    double scale = 0;
    for (size_t q = 0; q < count * npts; q++)
      if (fabs(s->e[q]) > scale) scale = fabs(s->e[q]);
    if (scale == 0) scale = escale;
    double dtol = 1e-12 * scale, ctol = 1e-9 * scale;
    double *wg = hu; /* count + 1 >= r + 2 values */
    const double gr = (sqrt(5.0) - 1) / 2;
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
        /* golden-section search on [p_{k-1}, p_{k+1}] */
        double a = grid_p(s->from, s->to, steps, k - 1), b = grid_p(s->from, s->to, steps, k + 1);
        double best_p = grid_p(s->from, s->to, steps, k), best_g = g[1];
        double x1 = b - gr * (b - a), x2 = a + gr * (b - a), f1, f2;
        lvs_clear_error(ctx);
        if ((st = gap_at(ctx, &md, x1, r, wg, &f1)) || (st = gap_at(ctx, &md, x2, r, wg, &f2))) goto fail;
        for (int it = 0; it < 200 && fabs(b - a) > 1e-15 * (fabs(a) + fabs(b)) + 1e-300; it++) {
          if (f1 <= f2) {
            b = x2; x2 = x1; f2 = f1;
            x1 = b - gr * (b - a);
            if ((st = gap_at(ctx, &md, x1, r, wg, &f1))) goto fail;
          } else {
            a = x1; x1 = x2; f1 = f2;
            x2 = a + gr * (b - a);
            if ((st = gap_at(ctx, &md, x2, r, wg, &f2))) goto fail;
          }
        }
        if (f1 < best_g) { best_g = f1; best_p = x1; }
        if (f2 < best_g) { best_g = f2; best_p = x2; }
        if (best_g < 0) best_g = 0;
        lvs_sweep_crossing c;
        c.at = best_p;
        c.gap = best_g;
        size_t i = srt[count + r].a, j = srt[count + r + 1].a;
        c.i = i < j ? i : j;
        c.j = i < j ? j : i;
        c.avoided = best_g > ctol;
        if ((st = add_crossing(s, &ccap, &c))) goto fail;
      }
    }
    if (s->ncross > 1) qsort(s->cross, s->ncross, sizeof *s->cross, cmp_cross);
  }

  *out = s;
  s = NULL;
  st = LVS_OK;
  goto done;
nomem:
  st = lvsi_fail(ctx, LVS_ENOMEM, "sweep: out of memory");
fail:
  lvs_sweep_free(s);
done:
  lvs_matrix_free(dh);
  lvs_matrix_free(dv);
  lvsi_free(ctx, h0a);
  lvsi_free(ctx, va);
  lvsi_free(ctx, wblk);
  lvsi_free(ctx, vblk);
  lvsi_free(ctx, prev);
  lvsi_free(ctx, tmp);
  lvsi_free(ctx, work_d);
  lvsi_free(ctx, pi);
  lvsi_free(ctx, perm);
  lvsi_free(ctx, iw);
  lvsi_free(ctx, cw);
  lvsi_free(ctx, srt);
  pthread_mutex_destroy(&la.mu);
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
size_t lvs_sweep_ncrossings(const lvs_sweep *s) { return s->ncross; }
const lvs_sweep_crossing *lvs_sweep_crossing_at(const lvs_sweep *s, size_t k) {
  return k < s->ncross ? &s->cross[k] : NULL;
}
double lvs_sweep_min_overlap(const lvs_sweep *s) { return s->min_overlap; }

/* ---- writers ----------------------------------------------------------------- */
static int ends_with(const char *s, const char *suf) {
  size_t a = strlen(s), b = strlen(suf);
  return a >= b && strcmp(s + a - b, suf) == 0;
}

int lvs_sweep_write(const lvs_sweep *s, const char *path) {
  lvs_ctx *ctx = s->ctx;
  if (!path || !*path) return lvsi_fail(ctx, LVS_EINVAL, "write needs a file path");
  size_t plen = strlen(path);
  char *tmpname = lvsi_malloc(ctx, plen + 5);
  if (!tmpname) return lvsi_fail(ctx, LVS_ENOMEM, "sweep write: out of memory");
  memcpy(tmpname, path, plen);
  memcpy(tmpname + plen, ".tmp", 5);
  FILE *f = fopen(tmpname, "w");
  if (!f) {
    int e = errno;
    int st = lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (opening '%s': %s)", path, tmpname, strerror(e));
    lvsi_free(ctx, tmpname);
    return st;
  }
  size_t npts = s->npts, count = s->count;
  if (ends_with(path, ".json")) {
    fprintf(f, "{\n  \"about\": \"H(p) = H0 + p V; energies in the model's units\",\n  \"p\": [");
    for (size_t k = 0; k < npts; k++) fprintf(f, "%s%.17g", k ? ", " : "", lvs_sweep_param(s, k));
    fprintf(f, "],\n  \"levels\": [");
    for (size_t a = 0; a < count; a++) {
      fprintf(f, "%s\n    [", a ? "," : "");
      for (size_t k = 0; k < npts; k++) fprintf(f, "%s%.17g", k ? ", " : "", s->e[a * npts + k]);
      fprintf(f, "]");
    }
    fprintf(f, "\n  ],\n  \"crossings\": [");
    for (size_t c = 0; c < s->ncross; c++) {
      const lvs_sweep_crossing *x = &s->cross[c];
      fprintf(f, "%s\n    {\"at\": %.17g, \"gap\": %.17g, \"levels\": [%zu, %zu], \"kind\": \"%s\"}",
              c ? "," : "", x->at, x->gap, x->i + 1, x->j + 1, x->avoided ? "avoided" : "crossing");
    }
    fprintf(f, "%s]\n}\n", s->ncross ? "\n  " : "");
  } else {
    fprintf(f, "# H(p) = H0 + p V; energies in the model's units\np");
    for (size_t a = 0; a < count; a++) fprintf(f, ",E%zu", a + 1);
    fputc('\n', f);
    for (size_t k = 0; k < npts; k++) {
      fprintf(f, "%.17g", lvs_sweep_param(s, k));
      for (size_t a = 0; a < count; a++) fprintf(f, ",%.17g", s->e[a * npts + k]);
      fputc('\n', f);
    }
  }
  int bad = ferror(f);
  if (fclose(f) != 0) bad = 1;
  if (bad) {
    remove(tmpname);
    lvsi_free(ctx, tmpname);
    return lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (error while writing)", path);
  }
  if (rename(tmpname, path) != 0) {
    int e = errno;
    remove(tmpname);
    lvsi_free(ctx, tmpname);
    return lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (rename: %s)", path, strerror(e));
  }
  lvsi_free(ctx, tmpname);
  return LVS_OK;
}

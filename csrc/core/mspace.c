/* mspace.c -- model spaces of nearly degenerate levels for the series.
 *
 * Rayleigh-Schroedinger theory level by level diverges when two levels of
 * H0 are closer than the coupling between them: for a pair with gap Delta
 * and coupling v the series in lambda has branch points at
 * lambda = +-i Delta / (2 v) (common practice; the two-level secular
 * equation). The published remedy is quasi-degenerate perturbation theory
 * (METHODS.md section 2; Bloch, Nucl. Phys. 6, 329 (1958); des Cloizeaux,
 * Nucl. Phys. 20, 321 (1960)): take the close levels together as a model
 * space P and diagonalize its effective Hamiltonian, whose order-K
 * eigenvalues agree with the exact levels to O(lambda^(K+1)) at any
 * lambda for which the series of H_eff converges -- and that series only
 * sees the denominators to levels outside P.
 *
 * The rule (documented in docs/series.md). Exact groups G, H of H0 (mean
 * energies E_G, E_H; the series' degeneracy tolerance) are joined when
 *     |E_G - E_H| < c * lambda_max * kappa_GH,
 *     kappa_GH = ||V_HG||_F / sqrt(min(d_G, d_H)),
 * with V_HG the block of V between them in H0's eigenbasis (kappa is
 * independent of the basis chosen inside each degenerate group, is |V_ab|
 * for two single levels and never exceeds ||V||_2). Joining is transitive
 * (a breadth-first closure from each wanted group). Candidates are only the
 * groups within c * lambda_max * ||V||_1 of a member (||V||_1 >= ||V||_2
 * >= kappa), found by bisection in the sorted energies, so the cost is a
 * few columns of V per member, not O(n^2). A closure of more than nmax
 * levels (or of every known level) means the coupling at lambda_max is
 * strong against the whole spectrum: c is halved for that closure until
 * it fits (only the closest levels are joined), up to 12 times, then the
 * exact groups are kept; a note says which happened.
 *
 * The effective Hamiltonian of each space is effective.c's (des Cloizeaux
 * form: Hermitian, so its eigenvalues are real at every order); this file
 * keeps its terms and evaluates eigenvalues at lambda.
 */
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

typedef double complex dc;

void lvsi_mspace_clear(lvs_ctx *ctx, lvsi_mspace *m) {
  lvsi_free(ctx, m->lev);
  lvsi_free(ctx, m->terms);
  memset(m, 0, sizeof *m);
}

/* first index i in [0, nk) with E[i] >= x (E ascending) */
static size_t lower_bound(const double *E, size_t nk, double x) {
  size_t lo = 0, hi = nk;
  while (lo < hi) {
    size_t mid = lo + (hi - lo) / 2;
    if (E[mid] < x) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

typedef struct {
  lvs_ctx *ctx;
  const lvsi_mspace_in *in;
  double factor; /* the rule's c: lowered for a closure that grew past the cap */
  size_t ng;
  size_t *gs;    /* group g: levels [gs[g], gs[g+1]) */
  size_t *gof;   /* level -> group */
  double *ge;    /* group mean energy */
  int *comp;     /* group -> component (-1: none yet) */
  size_t *queue; /* BFS of one component (group ids) */
  dc *Y;         /* columns of V for one group: nk x d */
  size_t yg;     /* the group whose columns Y holds (SIZE_MAX: none) */
  size_t *nzr, nnzr; /* rows where a column of Y is nonzero, ascending: only
                        their groups can couple (kappa > 0), so a candidate
                        scan visits those instead of every level in the
                        window (x^4 on 2000 levels: 38000 kappas -> 200) */
} msfind;

/* Y = the columns of V of group X (kept when they are there already) */
static int ms_load(msfind *f, size_t X) {
  if (f->yg == X && f->Y) return LVS_OK;
  const lvsi_mspace_in *in = f->in;
  size_t nk = in->nk, x0 = f->gs[X], dx = f->gs[X + 1] - x0;
  lvsi_free(f->ctx, f->Y);
  f->yg = SIZE_MAX;
  if (!(f->Y = lvsi_calloc(f->ctx, nk * dx, sizeof *f->Y)))
    return lvsi_fail(f->ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
  for (size_t j = 0; j < dx; j++) {
    int st = in->col(in->u, x0 + j, f->Y + j * nk);
    if (st) return st;
  }
  if (!f->nzr && !(f->nzr = lvsi_malloc(f->ctx, (nk ? nk : 1) * sizeof *f->nzr)))
    return lvsi_fail(f->ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
  f->nnzr = 0;
  for (size_t i = 0; i < nk; i++) {
    int nz = 0;
    for (size_t j = 0; j < dx && !nz; j++) nz = f->Y[j * nk + i] != 0.0;
    if (nz) f->nzr[f->nnzr++] = i;
  }
  f->yg = X;
  return LVS_OK;
}

static void msfind_free(msfind *f) {
  lvs_ctx *ctx = f->ctx;
  lvsi_free(ctx, f->gs), lvsi_free(ctx, f->gof), lvsi_free(ctx, f->ge), lvsi_free(ctx, f->comp);
  lvsi_free(ctx, f->queue), lvsi_free(ctx, f->Y), lvsi_free(ctx, f->nzr);
}

/* exact groups of the known levels (the series' own tolerance) */
static int ms_groups(msfind *f) {
  const lvsi_mspace_in *in = f->in;
  size_t nk = in->nk;
  lvs_ctx *ctx = f->ctx;
  f->gs = lvsi_malloc(ctx, (nk + 1) * sizeof *f->gs);
  f->gof = lvsi_malloc(ctx, (nk + 1) * sizeof *f->gof);
  f->ge = lvsi_malloc(ctx, (nk + 1) * sizeof *f->ge);
  f->comp = lvsi_malloc(ctx, (nk + 1) * sizeof *f->comp);
  f->queue = lvsi_malloc(ctx, (nk + 1) * sizeof *f->queue);
  if (!f->gs || !f->gof || !f->ge || !f->comp || !f->queue)
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
  size_t ng = 0;
  for (size_t g0 = 0; g0 < nk;) {
    size_t g1 = g0 + 1;
    while (g1 < nk && in->E[g1] - in->E[g1 - 1] <= in->gtol) g1++;
    double m = 0;
    for (size_t i = g0; i < g1; i++) m += in->E[i] / (double)(g1 - g0), f->gof[i] = ng;
    f->gs[ng] = g0;
    f->ge[ng] = m;
    f->comp[ng] = -1;
    ng++;
    g0 = g1;
  }
  f->gs[ng] = nk;
  f->ng = ng;
  return LVS_OK;
}

/* kappa between group X (columns in f->Y) and group H */
static double ms_kappa(const msfind *f, size_t X, size_t H) {
  size_t nk = f->in->nk, dx = f->gs[X + 1] - f->gs[X], dh = f->gs[H + 1] - f->gs[H];
  double s2 = 0;
  for (size_t j = 0; j < dx; j++)
    for (size_t i = f->gs[H]; i < f->gs[H + 1]; i++) {
      dc y = f->Y[j * nk + i];
      s2 += creal(y) * creal(y) + cimag(y) * cimag(y);
    }
  return sqrt(s2 / (double)(dx < dh ? dx : dh));
}

/* one component from the wanted group g: BFS; *size gets its level count
 * (the BFS stops once it passes the cap) */
static int ms_component(msfind *f, size_t g, int cid, size_t cap, size_t *nq, size_t *size, lvsi_mspace_note *why) {
  const lvsi_mspace_in *in = f->in;
  size_t nk = in->nk;
  double cl = f->factor * in->lambda_max, window = cl * in->vnorm;
  size_t head = 0;
  *nq = 0;
  f->queue[(*nq)++] = g;
  f->comp[g] = cid;
  *size = f->gs[g + 1] - f->gs[g];
  why->gap = INFINITY;
  double nbgap = INFINITY, nbkap = 0;
  size_t nb = SIZE_MAX;
  while (head < *nq && *size <= cap) {
    size_t X = f->queue[head++], x0 = f->gs[X];
    int st = ms_load(f, X);
    if (st) return st;
    size_t lo = lower_bound(in->E, nk, f->ge[X] - window), hi = lower_bound(in->E, nk, f->ge[X] + window);
    if (hi < nk && in->E[hi] <= f->ge[X] + window) hi++;
    size_t k = 0, last = SIZE_MAX; /* the coupled rows in [lo, hi) */
    while (k < f->nnzr && f->nzr[k] < lo) k++;
    for (; k < f->nnzr && f->nzr[k] < hi && *size <= cap; k++) {
      size_t H = f->gof[f->nzr[k]];
      if (H == last) continue;
      last = H;
      if (H == X || f->comp[H] == cid) continue;
      double gap = fabs(f->ge[H] - f->ge[X]), kap = ms_kappa(f, X, H);
      int join = in->join && gap < cl * kap;
      if (X == g && !join && kap > 0 && gap < nbgap) nbgap = gap, nbkap = kap, nb = f->gs[H];
      if (!join) continue;
      if (f->comp[H] >= 0) continue; /* joined elsewhere (a rounding asymmetry): leave it */
      f->comp[H] = cid;
      f->queue[(*nq)++] = H;
      *size += f->gs[H + 1] - f->gs[H];
      if (gap < why->gap) { /* the closest pair that was joined names the reason */
        why->gap = gap;
        why->kappa = kap;
        why->a = x0;
        why->b = f->gs[H];
      }
    }
  }
  /* the wanted group's nearest neighbour left outside: the closest coupled
   * group inside the window, else the adjacent groups below and above
   * (warnings at a lambda past lambda_max need them). g's own columns:
   * the loop above may not have run (g alone passes the cap) */
  if (in->note && nb == SIZE_MAX && *nq == 1) {
    int st = ms_load(f, g);
    if (st) return st;
  }
  if (in->note && nb == SIZE_MAX && *nq == 1)
    for (int side = 0; side < 2; side++) {
      size_t H;
      if (side == 0 && g > 0) H = g - 1;
      else if (side == 1 && g + 1 < f->ng) H = g + 1;
      else continue;
      double gap = fabs(f->ge[H] - f->ge[g]), kap = ms_kappa(f, g, H);
      if (kap > 0 && gap < nbgap) nbgap = gap, nbkap = kap, nb = f->gs[H];
    }
  if (in->note) in->note(in->u, f->gs[g], f->gs[g + 1], nb, nbgap, nbkap);
  return LVS_OK;
}

/* the space of one finished component: members ascending */
static int ms_emit(msfind *f, size_t nq, size_t size, const lvsi_mspace_note *why, lvsi_mspace *m) {
  lvs_ctx *ctx = f->ctx;
  memset(m, 0, sizeof *m);
  if (!(m->lev = lvsi_malloc(ctx, size * sizeof *m->lev)))
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
  /* groups of the queue in ascending order: they are few (<= cap) */
  size_t d = 0;
  for (size_t g = 0; g < f->ng && d < size; g++) {
    int in = 0;
    for (size_t q = 0; q < nq && !in; q++) in = f->queue[q] == g;
    if (!in) continue;
    for (size_t i = f->gs[g]; i < f->gs[g + 1]; i++) m->lev[d++] = i;
  }
  m->d = d;
  m->nsub = nq;
  snprintf(m->why, sizeof m->why,
           "levels %zu and %zu: gap %.4g below %.4g x lambda_max (%.4g) x coupling %.4g = %.4g",
           why->a + 1, why->b + 1, why->gap, f->factor, f->in->lambda_max, why->kappa,
           f->factor * f->in->lambda_max * why->kappa);
  return LVS_OK;
}

int lvsi_mspace_find(lvs_ctx *ctx, const lvsi_mspace_in *in, lvsi_mspace **out, size_t *nout, char *note,
                     size_t notelen) {
  *out = NULL;
  *nout = 0;
  if (note && notelen) note[0] = 0;
  if (in->nk < 2 || !(in->factor * in->lambda_max * in->vnorm > 0)) return LVS_OK;
  /* join = 0: only the neighbours are reported (exact groups asked for) */
  msfind f;
  memset(&f, 0, sizeof f);
  f.ctx = ctx;
  f.in = in;
  f.yg = SIZE_MAX;
  int st = ms_groups(&f);
  size_t cap = in->nmax;
  if (cap > in->nk - 1) cap = in->nk - 1; /* a model space leaves a level outside */
  lvsi_mspace *sp = NULL;
  size_t nsp = 0, spcap = 0;
  int cid = 0;
  for (size_t g = 0; g < f.ng && !st; g++) {
    int wanted = 0;
    for (size_t i = f.gs[g]; i < f.gs[g + 1] && !wanted; i++) wanted = in->want[i];
    if (!wanted || f.comp[g] >= 0) continue;
    size_t nq, size;
    lvsi_mspace_note why;
    /* a closure past the cap: the coupling is strong against the whole
     * spectrum; the rule is tightened (c halved) until only the closest
     * levels are joined, and a note says so */
    f.factor = in->factor;
    int tries = 0;
    for (;;) {
      if ((st = ms_component(&f, g, cid++, cap, &nq, &size, &why))) break;
      if (size <= cap || nq < 2 || !in->join || ++tries > 12) break;
      for (size_t q = 0; q < nq; q++) f.comp[f.queue[q]] = -1;
      f.factor *= 0.5;
    }
    if (st) break;
    if (tries && note && notelen && !note[0])
      snprintf(note, notelen,
               "coupling at lambda_max = %.4g joins more than %zu levels from level %zu on: near_factor lowered from "
               "%g to %g there%s; give lambda_max for the strengths you use",
               in->lambda_max, cap, f.gs[g] + 1, in->factor, f.factor,
               size > cap ? " and still too many: exact groups kept" : "");
    if (nq < 2 || !in->join) continue;
    if (size > cap) continue; /* its groups stay marked: examined, not a space */
    if (nsp == spcap) {
      size_t nc = spcap ? 2 * spcap : 4;
      lvsi_mspace *ns = lvsi_calloc(ctx, nc, sizeof *ns);
      if (!ns) {
        st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (model spaces)");
        break;
      }
      if (sp) memcpy(ns, sp, nsp * sizeof *ns);
      lvsi_free(ctx, sp);
      sp = ns;
      spcap = nc;
    }
    if ((st = ms_emit(&f, nq, size, &why, &sp[nsp]))) break;
    nsp++;
  }
  msfind_free(&f);
  if (st) {
    for (size_t i = 0; i < nsp; i++) lvsi_mspace_clear(ctx, &sp[i]);
    lvsi_free(ctx, sp);
    return st;
  }
  *out = sp;
  *nout = nsp;
  return LVS_OK;
}

/* the eigenvalues (ascending) of sum_{k <= order} lambda^k terms(k) */
int lvsi_mspace_eigvals(lvs_ctx *ctx, const lvsi_mspace *m, double lambda, int order, double *w) {
  size_t d = m->d, dd = d * d;
  if (order < 0 || order > m->K) order = m->K;
  for (int k = 0; k <= order; k++)
    for (size_t i = 0; i < dd; i++)
      if (!isfinite(creal(m->terms[(size_t)k * dd + i])) || !isfinite(cimag(m->terms[(size_t)k * dd + i])))
        return lvsi_fail(ctx, LVS_ERANGE,
                         "a model space's term of order %d is not finite (the terms overflowed); sum to order %d at most",
                         k, k - 1);
  dc *h = lvsi_calloc(ctx, dd, sizeof *h);
  if (!h) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  for (int k = order; k >= 0; k--)
    for (size_t i = 0; i < dd; i++) h[i] = h[i] * lambda + m->terms[(size_t)k * dd + i];
  int info;
  if (m->real) {
    double *a = lvsi_malloc(ctx, dd * sizeof *a); /* the Hermitian part's real entries */
    if (!a) {
      lvsi_free(ctx, h);
      return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    }
    for (size_t j = 0; j < d; j++)
      for (size_t i = 0; i < d; i++) a[j * d + i] = 0.5 * (creal(h[j * d + i]) + creal(h[i * d + j]));
    info = LAPACKE_dsyev(LAPACK_COL_MAJOR, 'N', 'L', (lapack_int)d, a, (lapack_int)d, w);
    lvsi_free(ctx, a);
  } else {
    for (size_t j = 0; j < d; j++)
      for (size_t i = j; i < d; i++) {
        dc x = 0.5 * (h[j * d + i] + conj(h[i * d + j]));
        h[j * d + i] = x;
        h[i * d + j] = conj(x);
      }
    info = LAPACKE_zheev(LAPACK_COL_MAJOR, 'N', 'L', (lapack_int)d, (lapack_complex_double *)h, (lapack_int)d, w);
  }
  lvsi_free(ctx, h);
  if (info) return lvsi_fail(ctx, LVS_ELAPACK, "perturb: eigenvalues of a model space's effective Hamiltonian failed");
  for (size_t i = 0; i < d; i++)
    if (!isfinite(w[i]))
      return lvsi_fail(ctx, LVS_ERANGE, "perturb: the effective Hamiltonian of levels %zu..%zu overflows at lambda = %g",
                       m->lev[0] + 1, m->lev[d - 1] + 1, lambda);
  return LVS_OK;
}

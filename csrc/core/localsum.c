/* localsum.c -- operators on a product basis kept as sums of products of
 * single-site operators, assembled into sparse storage once.
 *
 * A spin-chain Hamiltonian written as sum_i S_i . S_{i+1} + h sum_i Sx_i
 * builds, term by term, dozens of full-size sparse operators (each site
 * operator, each product, each scaled copy, each partial sum) before the
 * result exists. Here an operator of a product basis is a list of terms
 * c * f_1 (x) f_2 (x) ... (one small factor per site it acts on, identity
 * elsewhere); +, -, scalar * and * of such operators act on the lists, and
 * the operator is written out when something needs its entries:
 *
 *   plan    terms grouped by the set of sites they act on (lexicographic),
 *           each group's local matrix sum_t c_t kron(factors) in CSC over
 *           the group's own small space, every local entry stored with the
 *           row offset it causes in the full space (delta = sum over the
 *           group's sites of (row digit - column digit) * stride);
 *   count   per column j: the column digits, each group's local column,
 *           candidates (j + delta, value), merged by row (exact zeros of
 *           the sum dropped, as lvs_matrix_sum does); counts only;
 *   write   the same gather into the exact capacity.
 *
 * Both passes run on two threads for large bases (columns split in two).
 * Memory: the result plus two candidate buffers; no intermediate operator.
 * Groups in lexicographic site order give candidates almost in row order
 * for nearest-neighbour models (the shared sort of matrix.c, lvsi_sort_entries,
 * then only checks the one run).
 * Product of two sums: every pair of terms (at most LVS_LOCALSUM_MAX_TERMS
 * terms in the result), factors on a shared site multiplied in order. */
#include <complex.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define LOCALSUM_MIN_STATES 1024  /* below: site operators are built directly */
#define LOCALSUM_THREAD_COLS 32768 /* two threads from this many columns */

typedef struct { /* a d x d local factor in CSC */
  size_t d, nnz;
  size_t *cp;
  uint32_t *ri;
  double complex *v;
} lfac;

typedef struct {
  double complex c;
  size_t nf;
  size_t *site; /* ascending, 0-based */
  lfac *f;
} lterm;

struct lvs_localsum {
  lvs_ctx *ctx;
  size_t ns, n; /* sites, states */
  size_t *dims; /* per site */
  size_t nt;
  lterm *t;
  int cplx;
  long band;
};

/* ---- factors and terms ------------------------------------------------- */

static void fac_clear(lvs_ctx *ctx, lfac *f) {
  lvsi_free(ctx, f->cp);
  lvsi_free(ctx, f->ri);
  lvsi_free(ctx, f->v);
  memset(f, 0, sizeof *f);
}

static int fac_alloc(lvs_ctx *ctx, size_t d, size_t nnz, lfac *f) {
  f->d = d;
  f->nnz = 0;
  f->cp = lvsi_calloc(ctx, d + 1, sizeof *f->cp);
  f->ri = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof *f->ri);
  f->v = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof *f->v);
  if (f->cp && f->ri && f->v) return LVS_OK;
  fac_clear(ctx, f);
  return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for a site factor");
}

static int fac_copy(lvs_ctx *ctx, const lfac *a, lfac *f) {
  int st = fac_alloc(ctx, a->d, a->nnz, f);
  if (st) return st;
  memcpy(f->cp, a->cp, (a->d + 1) * sizeof *f->cp);
  if (a->nnz) {
    memcpy(f->ri, a->ri, a->nnz * sizeof *f->ri);
    memcpy(f->v, a->v, a->nnz * sizeof *f->v);
  }
  f->nnz = a->nnz;
  return LVS_OK;
}

/* a plain square op (dense or sparse) as a factor; exact zeros left out */
static int fac_from_matrix(lvs_ctx *ctx, const lvs_matrix *m, lfac *f) {
  size_t d = m->rows, cnt = m->sparse ? m->nnz : d * d;
  int st = fac_alloc(ctx, d, cnt, f);
  if (st) return st;
  for (size_t j = 0; j < d; j++) {
    f->cp[j] = f->nnz;
    if (m->sparse) {
      for (size_t k = m->cp[j]; k < m->cp[j + 1]; k++) {
        double complex v = m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
        if (v == 0.0) continue;
        f->ri[f->nnz] = m->ri[k];
        f->v[f->nnz++] = v;
      }
    } else {
      for (size_t i = 0; i < d; i++) {
        double complex v = lvsi_mat_at(m, i, j);
        if (v == 0.0) continue;
        f->ri[f->nnz] = (uint32_t)i;
        f->v[f->nnz++] = v;
      }
    }
  }
  f->cp[d] = f->nnz;
  return LVS_OK;
}

/* f = a * b (matrix product of two factors of one site) */
static int fac_mul(lvs_ctx *ctx, const lfac *a, const lfac *b, lfac *f) {
  size_t d = a->d, cap = 0;
  for (size_t j = 0; j < d; j++)
    for (size_t k = b->cp[j]; k < b->cp[j + 1]; k++) cap += a->cp[b->ri[k] + 1] - a->cp[b->ri[k]];
  if (cap > d * d) cap = d * d;
  int st = fac_alloc(ctx, d, cap, f);
  if (st) return st;
  double complex *acc = lvsi_calloc(ctx, d, sizeof *acc);
  unsigned char *mark = lvsi_calloc(ctx, d, 1);
  size_t *list = lvsi_malloc(ctx, (d ? d : 1) * sizeof *list);
  if (!acc || !mark || !list) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory multiplying site factors");
    goto done;
  }
  for (size_t j = 0; j < d; j++) {
    size_t nl = 0;
    f->cp[j] = f->nnz;
    for (size_t k = b->cp[j]; k < b->cp[j + 1]; k++) {
      size_t r = b->ri[k];
      for (size_t q = a->cp[r]; q < a->cp[r + 1]; q++) {
        size_t i = a->ri[q];
        if (!mark[i]) {
          mark[i] = 1;
          list[nl++] = i;
        }
        acc[i] += a->v[q] * b->v[k];
      }
    }
    /* rows ascending (insertion sort: columns hold few entries) */
    for (size_t p = 1; p < nl; p++) {
      size_t x = list[p], q = p;
      while (q > 0 && list[q - 1] > x) {
        list[q] = list[q - 1];
        q--;
      }
      list[q] = x;
    }
    for (size_t p = 0; p < nl; p++) {
      size_t i = list[p];
      if (acc[i] != 0.0) {
        f->ri[f->nnz] = (uint32_t)i;
        f->v[f->nnz++] = acc[i];
      }
      acc[i] = 0;
      mark[i] = 0;
    }
  }
  f->cp[d] = f->nnz;
done:
  lvsi_free(ctx, acc);
  lvsi_free(ctx, mark);
  lvsi_free(ctx, list);
  if (st) fac_clear(ctx, f);
  return st;
}

static void term_clear(lvs_ctx *ctx, lterm *t) {
  for (size_t k = 0; k < t->nf; k++) fac_clear(ctx, &t->f[k]);
  lvsi_free(ctx, t->site);
  lvsi_free(ctx, t->f);
  memset(t, 0, sizeof *t);
}

static int term_alloc(lvs_ctx *ctx, size_t nf, lterm *t) {
  memset(t, 0, sizeof *t);
  t->site = lvsi_calloc(ctx, nf ? nf : 1, sizeof *t->site);
  t->f = lvsi_calloc(ctx, nf ? nf : 1, sizeof *t->f);
  if (t->site && t->f) return LVS_OK;
  lvsi_free(ctx, t->site);
  lvsi_free(ctx, t->f);
  return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for an operator term");
}

static int term_copy(lvs_ctx *ctx, const lterm *a, double complex z, lterm *t) {
  int st = term_alloc(ctx, a->nf, t);
  if (st) return st;
  t->c = a->c * z;
  for (size_t k = 0; k < a->nf; k++) {
    t->site[k] = a->site[k];
    if ((st = fac_copy(ctx, &a->f[k], &t->f[k]))) {
      term_clear(ctx, t);
      return st;
    }
    t->nf = k + 1;
  }
  t->nf = a->nf;
  return LVS_OK;
}

/* t = a * b: sites merged in order, a shared site's factors multiplied */
static int term_mul(lvs_ctx *ctx, const lterm *a, const lterm *b, lterm *t) {
  int st = term_alloc(ctx, a->nf + b->nf, t);
  if (st) return st;
  t->c = a->c * b->c;
  size_t i = 0, j = 0;
  while (!st && (i < a->nf || j < b->nf)) {
    size_t k = t->nf;
    if (j == b->nf || (i < a->nf && a->site[i] < b->site[j])) {
      t->site[k] = a->site[i];
      st = fac_copy(ctx, &a->f[i++], &t->f[k]);
    } else if (i == a->nf || b->site[j] < a->site[i]) {
      t->site[k] = b->site[j];
      st = fac_copy(ctx, &b->f[j++], &t->f[k]);
    } else {
      t->site[k] = a->site[i];
      st = fac_mul(ctx, &a->f[i++], &b->f[j++], &t->f[k]);
    }
    if (!st) t->nf = k + 1;
  }
  if (st) term_clear(ctx, t);
  return st;
}

/* ---- the sums ------------------------------------------------------------ */

static int ls_alloc(lvs_ctx *ctx, size_t ns, const size_t *dims, size_t n, size_t nt, lvs_localsum **out) {
  *out = NULL;
  if (nt > LVS_LOCALSUM_MAX_TERMS)
    return lvsi_fail(ctx, LVS_ECAP, "an operator of %zu terms is above the limit of %d terms", nt,
                     LVS_LOCALSUM_MAX_TERMS);
  lvs_localsum *s = lvsi_calloc(ctx, 1, sizeof *s);
  if (!s) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for an operator sum");
  s->ctx = ctx;
  s->ns = ns;
  s->n = n;
  s->dims = lvsi_malloc(ctx, ns * sizeof *s->dims);
  s->t = lvsi_calloc(ctx, nt ? nt : 1, sizeof *s->t);
  if (!s->dims || !s->t) {
    lvsi_free(ctx, s->dims);
    lvsi_free(ctx, s->t);
    lvsi_free(ctx, s);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory for an operator sum");
  }
  memcpy(s->dims, dims, ns * sizeof *s->dims);
  *out = s;
  return LVS_OK;
}

void lvs_localsum_free(lvs_localsum *s) {
  if (!s) return;
  for (size_t k = 0; k < s->nt; k++) term_clear(s->ctx, &s->t[k]);
  lvsi_free(s->ctx, s->t);
  lvsi_free(s->ctx, s->dims);
  lvsi_free(s->ctx, s);
}

size_t lvs_localsum_terms(const lvs_localsum *s) { return s->nt; }
size_t lvs_localsum_dim(const lvs_localsum *s) { return s->n; }
int lvs_localsum_is_complex(const lvs_localsum *s) { return s->cplx; }
lvs_ctx *lvs_localsum_ctx(const lvs_localsum *s) { return s->ctx; }

int lvs_localsum_pays(const lvs_basis *b) {
  return lvs_basis_kind_of(b) == LVS_BASIS_PRODUCT && !lvsi_basis_padded(b) &&
         lvs_basis_dim(b) >= LOCALSUM_MIN_STATES && lvs_basis_dim(b) <= LVSI_SPARSE_MAX_DIM;
}

int lvs_localsum_site(const lvs_basis *b, size_t site, const char *name, lvs_localsum **out) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  *out = NULL;
  if (lvs_basis_kind_of(b) != LVS_BASIS_PRODUCT || lvsi_basis_padded(b))
    return lvsi_fail(ctx, LVS_EINVAL, "site sums need a product basis without padded sites");
  size_t ns = lvs_basis_sites(b);
  int ident = strcmp(name, "identity") == 0;
  if (!ident && (site < 1 || site > ns))
    return lvsi_fail(ctx, LVS_ERANGE, "site %zu out of range (the product has %zu sites)", site, ns);
  size_t dims[64];
  if (ns > 64) return lvsi_fail(ctx, LVS_EINVAL, "a product of %zu sites is above 64", ns);
  for (size_t i = 0; i < ns; i++) dims[i] = lvs_basis_dim(lvs_basis_site(b, i));
  lvs_localsum *s;
  int st = ls_alloc(ctx, ns, dims, lvs_basis_dim(b), 1, &s);
  if (st) return st;
  lvs_matrix *op = NULL;
  if (ident) {
    st = term_alloc(ctx, 0, &s->t[0]);
    s->band = 0;
  } else if (!(st = lvs_basis_op(lvs_basis_site(b, site - 1), 0, name, &op)) &&
             !(st = term_alloc(ctx, 1, &s->t[0]))) {
    s->t[0].site[0] = site - 1;
    st = fac_from_matrix(ctx, op, &s->t[0].f[0]);
    if (!st) s->t[0].nf = 1;
    s->cplx = op->cplx;
    s->band = op->band;
  }
  lvs_matrix_free(op);
  if (st) {
    lvs_localsum_free(s);
    return st;
  }
  s->t[0].c = 1.0;
  s->nt = 1;
  *out = s;
  return LVS_OK;
}

int lvs_localsum_place(const lvs_basis *b, size_t site, const lvs_matrix *m, lvs_localsum **out) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  *out = NULL;
  int st = lvsi_place_check(b, site, m);
  if (st) return st;
  if (lvsi_basis_padded(b)) return lvsi_fail(ctx, LVS_EINVAL, "site sums need a product basis without padded sites");
  size_t ns = lvs_basis_sites(b), dims[64];
  if (ns > 64) return lvsi_fail(ctx, LVS_EINVAL, "a product of %zu sites is above 64", ns);
  for (size_t i = 0; i < ns; i++) dims[i] = lvs_basis_dim(lvs_basis_site(b, i));
  lvs_localsum *s;
  if ((st = ls_alloc(ctx, ns, dims, lvs_basis_dim(b), 1, &s))) return st;
  if (!(st = term_alloc(ctx, 1, &s->t[0]))) {
    s->t[0].site[0] = site - 1;
    if (!(st = fac_from_matrix(ctx, m, &s->t[0].f[0]))) s->t[0].nf = 1;
  }
  if (st) {
    lvs_localsum_free(s);
    return st;
  }
  s->t[0].c = 1.0;
  s->nt = 1;
  s->cplx = m->cplx;
  s->band = (long)m->rows;
  *out = s;
  return LVS_OK;
}

int lvs_localsum_compatible(const lvs_localsum *a, const lvs_localsum *b) {
  return a->ns == b->ns && !memcmp(a->dims, b->dims, a->ns * sizeof *a->dims);
}

int lvs_localsum_sum(lvs_ctx *ctx, size_t count, const double (*coef)[2], const lvs_localsum *const *terms,
                     lvs_localsum **out) {
  *out = NULL;
  const lvs_localsum *first = NULL;
  size_t nt = 0;
  for (size_t k = 0; k < count; k++) {
    const lvs_localsum *a = terms[k];
    if (!a) {
      nt++;
      continue;
    }
    if (first && !lvs_localsum_compatible(first, a))
      return lvsi_fail(ctx, LVS_EDIM, "term %zu lives on another product basis", k + 1);
    if (!first) first = a;
    if (a->nt > LVS_LOCALSUM_MAX_TERMS - nt)
      return lvsi_fail(ctx, LVS_ECAP, "an operator of more than %d terms is above the limit",
                       LVS_LOCALSUM_MAX_TERMS);
    nt += a->nt;
  }
  if (!first) return lvsi_fail(ctx, LVS_EINVAL, "a sum needs at least one operator");
  lvs_localsum *s;
  int st = ls_alloc(ctx, first->ns, first->dims, first->n, nt, &s);
  if (st) return st;
  s->band = 0;
  for (size_t k = 0; k < count && !st; k++) {
    double complex z = coef ? CMPLX(coef[k][0], coef[k][1]) : 1.0;
    if (cimag(z) != 0.0) s->cplx = 1;
    const lvs_localsum *a = terms[k];
    if (!a) { /* z times the identity */
      if (!(st = term_alloc(ctx, 0, &s->t[s->nt]))) s->t[s->nt++].c = z;
      continue;
    }
    if (a->cplx) s->cplx = 1;
    if (a->band > s->band) s->band = a->band;
    for (size_t q = 0; q < a->nt && !st; q++)
      if (!(st = term_copy(ctx, &a->t[q], z, &s->t[s->nt]))) s->nt++;
  }
  if (st) {
    lvs_localsum_free(s);
    return st;
  }
  *out = s;
  return LVS_OK;
}

int lvs_localsum_mul(const lvs_localsum *a, const lvs_localsum *b, lvs_localsum **out) {
  lvs_ctx *ctx = a->ctx;
  *out = NULL;
  if (!lvs_localsum_compatible(a, b)) return lvsi_fail(ctx, LVS_EDIM, "the factors live on different product bases");
  if (a->nt && b->nt > LVS_LOCALSUM_MAX_TERMS / a->nt)
    return lvsi_fail(ctx, LVS_ECAP, "a product of %zu by %zu terms is above the limit of %d terms", a->nt, b->nt,
                     LVS_LOCALSUM_MAX_TERMS);
  lvs_localsum *s;
  int st = ls_alloc(ctx, a->ns, a->dims, a->n, a->nt * b->nt, &s);
  if (st) return st;
  s->cplx = a->cplx || b->cplx;
  s->band = a->band + b->band;
  for (size_t i = 0; i < a->nt && !st; i++)
    for (size_t j = 0; j < b->nt && !st; j++)
      if (!(st = term_mul(ctx, &a->t[i], &b->t[j], &s->t[s->nt]))) s->nt++;
  if (st) {
    lvs_localsum_free(s);
    return st;
  }
  *out = s;
  return LVS_OK;
}

/* ---- writing the operator out ---------------------------------------------- */

typedef struct { /* one group of terms acting on the same sites */
  size_t nsite, *site; /* BORROWED from the first term */
  size_t *lw;          /* local weight of each site (last fastest) */
  size_t *cp;          /* local CSC over the group's space */
  long *delta;
  double complex *val;
  size_t maxcol;
} lgroup;

typedef struct {
  const lvs_localsum *s;
  size_t ng, maxc;
  lgroup *g;
  size_t stride[64];
} lplan;

static int site_cmp(const lterm *a, const lterm *b) {
  for (size_t k = 0; k < a->nf && k < b->nf; k++)
    if (a->site[k] != b->site[k]) return a->site[k] < b->site[k] ? -1 : 1;
  return a->nf < b->nf ? -1 : a->nf > b->nf;
}

static int order_cmp(const void *x, const void *y) {
  const lterm *a = *(const lterm *const *)x, *b = *(const lterm *const *)y;
  int c = site_cmp(a, b);
  return c ? c : (a > b) - (a < b); /* stable: terms of a group in order */
}

typedef struct {
  size_t lc, lr, seq;
  double complex v;
} ltrip;

static int trip_cmp(const void *x, const void *y) {
  const ltrip *a = x, *b = y;
  if (a->lc != b->lc) return a->lc < b->lc ? -1 : 1;
  if (a->lr != b->lr) return a->lr < b->lr ? -1 : 1;
  return (a->seq > b->seq) - (a->seq < b->seq);
}

/* number of local entries of term t (product of its factors' entries) */
static size_t term_entries(const lterm *t) {
  size_t c = 1;
  for (size_t k = 0; k < t->nf; k++) c *= t->f[k].nnz;
  return c;
}

/* the triplets of c kron(factors) of term t, appended at *tr */
static void term_triplets(const lterm *t, const size_t *lw, ltrip *tr, size_t *ntr) {
  size_t pos[64] = {0}; /* entry index inside each factor */
  size_t nf = t->nf;
  for (size_t k = 0; k < nf; k++)
    if (t->f[k].nnz == 0) return;
  for (;;) {
    size_t lr = 0, lc = 0;
    double complex v = t->c;
    for (size_t k = 0; k < nf; k++) {
      const lfac *f = &t->f[k];
      size_t e = pos[k], col = 0;
      while (f->cp[col + 1] <= e) col++;
      lr += f->ri[e] * lw[k];
      lc += col * lw[k];
      v *= f->v[e];
    }
    tr[*ntr].lr = lr;
    tr[*ntr].lc = lc;
    tr[*ntr].seq = *ntr;
    tr[(*ntr)++].v = v;
    size_t k = nf;
    while (k > 0) {
      k--;
      if (++pos[k] < t->f[k].nnz) break;
      pos[k] = 0;
      if (k == 0) return;
    }
    if (nf == 0) return;
  }
}

/* group [first, first + cnt) of the ordered terms: its local CSC */
static int group_make(lplan *p, const lterm *const *ord, size_t first, size_t cnt, lgroup *g) {
  const lvs_localsum *s = p->s;
  lvs_ctx *ctx = s->ctx;
  const lterm *t0 = ord[first];
  g->nsite = t0->nf;
  g->site = t0->site;
  size_t D = 1, ntr = 0;
  g->lw = lvsi_malloc(ctx, (g->nsite ? g->nsite : 1) * sizeof *g->lw);
  if (!g->lw) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory assembling an operator");
  for (size_t k = g->nsite; k-- > 0;) {
    g->lw[k] = D;
    D *= s->dims[g->site[k]];
  }
  for (size_t q = 0; q < cnt; q++) ntr += term_entries(ord[first + q]);
  ltrip *tr = lvsi_malloc(ctx, (ntr ? ntr : 1) * sizeof *tr);
  g->cp = lvsi_calloc(ctx, D + 1, sizeof *g->cp);
  g->delta = lvsi_malloc(ctx, (ntr ? ntr : 1) * sizeof *g->delta);
  g->val = lvsi_malloc(ctx, (ntr ? ntr : 1) * sizeof *g->val);
  if (!tr || !g->cp || !g->delta || !g->val) {
    lvsi_free(ctx, tr);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory assembling an operator");
  }
  ntr = 0;
  for (size_t q = 0; q < cnt; q++) term_triplets(ord[first + q], g->lw, tr, &ntr);
  qsort(tr, ntr, sizeof *tr, trip_cmp);
  /* merge duplicates (terms in order: the sum's rounding is their order's) */
  size_t m = 0;
  for (size_t k = 0; k < ntr;) {
    size_t e = k + 1;
    double complex v = tr[k].v;
    while (e < ntr && tr[e].lc == tr[k].lc && tr[e].lr == tr[k].lr) v += tr[e++].v;
    if (v != 0.0) {
      tr[m] = tr[k];
      tr[m++].v = v;
    }
    k = e;
  }
  g->maxcol = 0;
  size_t e = 0;
  for (size_t lc = 0; lc < D; lc++) {
    g->cp[lc] = e;
    while (e < m && tr[e].lc == lc) {
      long dl = 0;
      size_t lr = tr[e].lr, cc = lc;
      for (size_t k = 0; k < g->nsite; k++) {
        size_t dr = lr / g->lw[k], dc = cc / g->lw[k];
        lr %= g->lw[k];
        cc %= g->lw[k];
        dl += ((long)dr - (long)dc) * (long)p->stride[g->site[k]];
      }
      g->delta[e] = dl;
      g->val[e] = tr[e].v;
      e++;
    }
    if (e - g->cp[lc] > g->maxcol) g->maxcol = e - g->cp[lc];
  }
  g->cp[D] = e;
  lvsi_free(ctx, tr);
  return LVS_OK;
}

static void plan_clear(lvs_ctx *ctx, lplan *p) {
  for (size_t k = 0; k < p->ng; k++) {
    lvsi_free(ctx, p->g[k].lw);
    lvsi_free(ctx, p->g[k].cp);
    lvsi_free(ctx, p->g[k].delta);
    lvsi_free(ctx, p->g[k].val);
  }
  lvsi_free(ctx, p->g);
  p->g = NULL;
  p->ng = 0;
}

static int plan_make(const lvs_localsum *s, lplan *p) {
  lvs_ctx *ctx = s->ctx;
  memset(p, 0, sizeof *p);
  p->s = s;
  size_t str = 1;
  for (size_t i = s->ns; i-- > 0;) {
    p->stride[i] = str;
    str *= s->dims[i];
  }
  const lterm **ord = lvsi_malloc(ctx, (s->nt ? s->nt : 1) * sizeof *ord);
  p->g = lvsi_calloc(ctx, s->nt ? s->nt : 1, sizeof *p->g);
  if (!ord || !p->g) {
    lvsi_free(ctx, ord);
    lvsi_free(ctx, p->g);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory assembling an operator");
  }
  for (size_t k = 0; k < s->nt; k++) ord[k] = &s->t[k];
  qsort(ord, s->nt, sizeof *ord, order_cmp);
  int st = LVS_OK;
  for (size_t k = 0; k < s->nt && !st;) {
    size_t e = k + 1;
    while (e < s->nt && site_cmp(ord[k], ord[e]) == 0) e++;
    st = group_make(p, ord, k, e - k, &p->g[p->ng]);
    p->ng++;
    if (!st) p->maxc += p->g[p->ng - 1].maxcol;
    k = e;
  }
  lvsi_free(ctx, ord);
  if (st) plan_clear(ctx, p);
  return st;
}

/* the merged entries of column j (digits dig) into out, sorted; returns
 * their count. out: 2 maxc + 2 entries (candidates, then the sort's
 * scratch), pos: maxc. */
static size_t col_gather(const lplan *p, size_t j, const size_t *dig, lvsi_ent *out, lvsi_ent *pos) {
  size_t nn = 0, np = 0;
  double complex dg = 0;
  int hasdiag = 0;
  for (size_t g = 0; g < p->ng; g++) {
    const lgroup *G = &p->g[g];
    size_t lc = 0;
    for (size_t k = 0; k < G->nsite; k++) lc += dig[G->site[k]] * G->lw[k];
    for (size_t e = G->cp[lc]; e < G->cp[lc + 1]; e++) {
      long dl = G->delta[e];
      if (dl == 0) {
        dg += G->val[e];
        hasdiag = 1;
        continue;
      }
      lvsi_ent *c = dl < 0 ? &out[nn++] : &pos[np++];
      c->row = (size_t)((long)j + dl);
      c->re = creal(G->val[e]);
      c->im = cimag(G->val[e]);
    }
  }
  /* negatives in group order, the diagonal, positives reversed: one sorted
   * run for chains with nearest-neighbour terms (the sort then only checks) */
  if (hasdiag) out[nn++] = (lvsi_ent){j, creal(dg), cimag(dg)};
  while (np > 0) out[nn++] = pos[--np];
  lvsi_sort_entries(out, nn, out + nn);
  size_t m = 0;
  for (size_t a = 0; a < nn;) { /* equal rows summed, exact zeros dropped */
    size_t b = a + 1;
    double re = out[a].re, im = out[a].im;
    while (b < nn && out[b].row == out[a].row) re += out[b].re, im += out[b++].im;
    if (re != 0.0 || im != 0.0) out[m++] = (lvsi_ent){out[a].row, re, im};
    a = b;
  }
  return m;
}

typedef struct {
  const lplan *p;
  lvs_matrix *c;
  size_t j0, j1;
  int write;
  lvsi_ent *buf; /* 3 maxc + 3: candidates and the sort's scratch, then pos */
} lwork;

static void *col_pass(void *arg) {
  lwork *w = arg;
  const lplan *p = w->p;
  const lvs_localsum *s = p->s;
  size_t dig[64], rem = w->j0;
  for (size_t i = 0; i < s->ns; i++) {
    dig[i] = rem / p->stride[i];
    rem %= p->stride[i];
  }
  lvs_matrix *c = w->c;
  lvsi_ent *out = w->buf, *pos = w->buf + 2 * p->maxc + 2;
  for (size_t j = w->j0; j < w->j1; j++) {
    size_t m = col_gather(p, j, dig, out, pos);
    if (!w->write) {
      c->cp[j + 1] = m;
    } else {
      size_t at = c->cp[j];
      for (size_t k = 0; k < m; k++) {
        c->ri[at + k] = (uint32_t)out[k].row;
        if (c->cplx) {
          c->a[2 * (at + k)] = out[k].re;
          c->a[2 * (at + k) + 1] = out[k].im;
        } else {
          c->a[at + k] = out[k].re;
        }
      }
    }
    for (size_t i = s->ns; i-- > 0;) { /* next column's digits */
      if (++dig[i] < s->dims[i]) break;
      dig[i] = 0;
    }
  }
  return NULL;
}

/* one pass over all columns, on two threads when large */
static void run_pass(const lplan *p, lvs_matrix *c, int write, lvsi_ent *buf0, lvsi_ent *buf1) {
  size_t n = p->s->n;
  lwork w0 = {p, c, 0, n, write, buf0}, w1 = w0;
  pthread_t th;
  if (buf1 && n >= LOCALSUM_THREAD_COLS) {
    w0.j1 = w1.j0 = n / 2;
    w1.buf = buf1;
    if (pthread_create(&th, NULL, col_pass, &w1) == 0) {
      col_pass(&w0);
      pthread_join(th, NULL);
      return;
    }
    w0.j1 = n;
  }
  col_pass(&w0);
}

int lvs_localsum_matrix(const lvs_localsum *s, lvs_matrix **out) {
  lvs_ctx *ctx = s->ctx;
  *out = NULL;
  lplan p;
  int st = plan_make(s, &p);
  if (st) return st;
  lvs_matrix *c = NULL;
  size_t nb = 3 * p.maxc + 3;
  lvsi_ent *b0 = lvsi_malloc(ctx, nb * sizeof *b0), *b1 = lvsi_malloc(ctx, nb * sizeof *b1);
  if (!b0) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory assembling an operator");
    goto done;
  }
  if ((st = lvsi_mat_alloc(ctx, s->n, s->n, s->cplx, 1, 4, &c))) goto done;
  run_pass(&p, c, 0, b0, b1);
  c->cp[0] = 0;
  for (size_t j = 0; j < s->n; j++) c->cp[j + 1] += c->cp[j];
  if ((st = lvsi_mat_reserve(c, c->cp[s->n] ? c->cp[s->n] : 1))) goto done;
  run_pass(&p, c, 1, b0, b1);
  c->nnz = c->cp[s->n];
  c->band = s->band < (long)s->n ? s->band : (long)s->n;
  c->slack = LVS_INF_SLACK;
  st = lvsi_mat_compact(c);
done:
  lvsi_free(ctx, b0);
  lvsi_free(ctx, b1);
  plan_clear(ctx, &p);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

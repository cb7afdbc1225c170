/* basis.c -- bases with labels and their standard operators.
 *
 * Oscillator (hbar = m = omega = 1): <n-1|a|n> = sqrt(n), x = (a + a^+)/sqrt 2,
 * p = i (a^+ - a)/sqrt 2 (source: Sakurai & Napolitano, Modern Quantum
 * Mechanics, 2nd ed. 2011, eqs. 2.3.24-2.3.25). Operators are stored on
 * N + pad levels so that products stay exact in the visible N (matrix.c).
 * Spin: Sz|m> = m|m>, <m+1|S+|m> = sqrt(S(S+1) - m(m+1)), states ordered
 * m = S, S-1, ..., -S (same source, eq. 3.5.41).
 */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

#define LABEL_LEN 16

struct lvs_basis {
  lvs_ctx *ctx;
  lvs_basis_kind kind;
  size_t n, m;       /* visible and stored dimension */
  size_t pad;        /* oscillator padding */
  int twoS;          /* spin */
  lvsi_basis_op_fn kop; /* operators of a kind defined in its own file */
  double kpar[LVSI_BASIS_NPAR]; /* that kind's parameters */
  size_t nsites;
  lvs_basis **sites; /* product: owned copies */
  size_t nlab;
  char (*names)[LABEL_LEN];
  double *labels;    /* n * nlab, state-major */
  size_t *vis;       /* n stored indices, NULL if unpadded */
  size_t nops;       /* custom: named operators (plain n x n, owned) */
  char (*opnames)[LABEL_LEN];
  lvs_matrix **ops;
};

/* stored: 0 for a product, whose labels are its sites' (lvs_basis_label
 * finds them from the state's digits: a 20-site chain's labels would take
 * 168 MB) */
static int basis_alloc_ex(lvs_ctx *ctx, lvs_basis_kind kind, size_t n, size_t nlab, int stored,
                          lvs_basis **out) {
  *out = NULL;
  if (nlab && n > SIZE_MAX / nlab / sizeof(double))
    return lvsi_fail(ctx, LVS_ECAP, "basis of %zu states is too large", n);
  lvs_basis *b = lvsi_calloc(ctx, 1, sizeof *b);
  if (!b) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory allocating a basis");
  b->ctx = ctx;
  b->kind = kind;
  b->n = b->m = n;
  b->nlab = nlab;
  b->names = lvsi_calloc(ctx, nlab ? nlab : 1, LABEL_LEN);
  b->labels = lvsi_calloc(ctx, (stored && n != 0 && nlab != 0) ? n * nlab : 1, sizeof(double));
  if (!b->names || !b->labels) {
    lvs_basis_free(b);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory allocating basis labels for %zu states", n);
  }
  *out = b;
  return LVS_OK;
}

static int basis_alloc(lvs_ctx *ctx, lvs_basis_kind kind, size_t n, size_t nlab, lvs_basis **out) {
  return basis_alloc_ex(ctx, kind, n, nlab, 1, out);
}

void lvs_basis_free(lvs_basis *b) {
  if (!b) return;
  lvs_ctx *ctx = b->ctx;
  for (size_t i = 0; i < b->nsites; i++) lvs_basis_free(b->sites[i]);
  lvsi_free(ctx, b->sites);
  lvsi_free(ctx, b->names);
  lvsi_free(ctx, b->labels);
  lvsi_free(ctx, b->vis);
  for (size_t i = 0; i < b->nops; i++) lvs_matrix_free(b->ops[i]);
  lvsi_free(ctx, b->ops);
  lvsi_free(ctx, b->opnames);
  lvsi_free(ctx, b);
}

int lvs_basis_plain(lvs_ctx *ctx, size_t n, lvs_basis **out) {
  if (n == 0) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_EINVAL, "basis size must be positive");
  }
  int st = basis_alloc(ctx, LVS_BASIS_PLAIN, n, 1, out);
  if (st) return st;
  strcpy((*out)->names[0], "i");
  for (size_t i = 0; i < n; i++) (*out)->labels[i] = (double)(i + 1);
  return LVS_OK;
}

int lvs_basis_oscillator(lvs_ctx *ctx, size_t n, size_t pad, lvs_basis **out) {
  if (n == 0) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_EINVAL, "oscillator basis size must be positive");
  }
  if (n > SIZE_MAX / 4 || pad > SIZE_MAX / 4) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_ECAP, "oscillator basis of %zu states is too large", n);
  }
  int st = basis_alloc(ctx, LVS_BASIS_OSCILLATOR, n, 1, out);
  if (st) return st;
  lvs_basis *b = *out;
  strcpy(b->names[0], "n");
  for (size_t i = 0; i < n; i++) b->labels[i] = (double)i;
  b->pad = pad;
  b->m = n + pad;
  if (pad) {
    b->vis = lvsi_malloc(ctx, n * sizeof(size_t));
    if (!b->vis) {
      lvs_basis_free(b);
      *out = NULL;
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < n; i++) b->vis[i] = i;
  }
  return LVS_OK;
}

int lvs_basis_spin(lvs_ctx *ctx, int twoS, lvs_basis **out) {
  if (twoS < 1 || twoS > 100000) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_EINVAL, "spin S must be a positive multiple of 1/2, got %g", twoS / 2.0);
  }
  int st = basis_alloc(ctx, LVS_BASIS_SPIN, (size_t)twoS + 1, 1, out);
  if (st) return st;
  strcpy((*out)->names[0], "m");
  (*out)->twoS = twoS;
  for (int i = 0; i <= twoS; i++) (*out)->labels[i] = twoS / 2.0 - i;
  return LVS_OK;
}

static int basis_copy(const lvs_basis *a, lvs_basis **out) {
  int stored = a->kind != LVS_BASIS_PRODUCT;
  int st = basis_alloc_ex(a->ctx, a->kind, a->n, a->nlab, stored, out);
  if (st) return st;
  lvs_basis *b = *out;
  memcpy(b->names, a->names, a->nlab * LABEL_LEN);
  if (stored) memcpy(b->labels, a->labels, a->n * a->nlab * sizeof(double));
  b->m = a->m;
  b->pad = a->pad;
  b->twoS = a->twoS;
  b->kop = a->kop;
  memcpy(b->kpar, a->kpar, sizeof b->kpar);
  if (a->vis) {
    b->vis = lvsi_malloc(a->ctx, a->n * sizeof(size_t));
    if (!b->vis) goto nomem;
    memcpy(b->vis, a->vis, a->n * sizeof(size_t));
  }
  for (size_t i = 0; i < a->nops; i++)
    if ((st = lvs_basis_custom_op(b, a->opnames[i], a->ops[i]))) {
      lvs_basis_free(b);
      *out = NULL;
      return st;
    }
  if (a->nsites) {
    b->sites = lvsi_calloc(a->ctx, a->nsites, sizeof(lvs_basis *));
    if (!b->sites) goto nomem;
    b->nsites = a->nsites;
    for (size_t i = 0; i < a->nsites; i++)
      if ((st = basis_copy(a->sites[i], &b->sites[i]))) {
        lvs_basis_free(b);
        *out = NULL;
        return st;
      }
  }
  return LVS_OK;
nomem:
  lvs_basis_free(b);
  *out = NULL;
  return lvsi_fail(a->ctx, LVS_ENOMEM, "out of memory");
}

int lvs_basis_product(lvs_ctx *ctx, const lvs_basis *const *sites, size_t count, lvs_basis **out) {
  *out = NULL;
  if (count < 1) return lvsi_fail(ctx, LVS_EINVAL, "a product needs at least one basis");
  size_t n = 1, m = 1, nlab = 0;
  int padded = 0;
  for (size_t i = 0; i < count; i++) {
    const lvs_basis *s = sites[i];
    if (s->kind == LVS_BASIS_PRODUCT)
      return lvsi_fail(ctx, LVS_EINVAL, "factor %zu is itself a product; list its sites instead", i + 1);
    if (n > SIZE_MAX / s->n / 64 || m > SIZE_MAX / s->m / 64)
      return lvsi_fail(ctx, LVS_ECAP, "product basis is too large");
    n *= s->n;
    m *= s->m;
    nlab += s->nlab;
    if (s->vis) padded = 1;
  }
  if (n > ((size_t)1 << 40))
    return lvsi_fail(ctx, LVS_ECAP, "product basis of %zu states is too large", n);
  int st = basis_alloc_ex(ctx, LVS_BASIS_PRODUCT, n, nlab, 0, out);
  if (st) return st;
  lvs_basis *b = *out;
  b->m = m;
  b->sites = lvsi_calloc(ctx, count, sizeof(lvs_basis *));
  if (!b->sites) goto nomem;
  b->nsites = count;
  for (size_t i = 0; i < count; i++)
    if ((st = basis_copy(sites[i], &b->sites[i]))) goto fail;
  /* label names: site label + site number */
  size_t k = 0;
  for (size_t i = 0; i < count; i++)
    for (size_t l = 0; l < sites[i]->nlab; l++, k++)
      snprintf(b->names[k], LABEL_LEN, "%.8s%u", sites[i]->names[l], (unsigned)((i + 1) % 100000));
  if (padded) {
    b->vis = lvsi_malloc(ctx, n * sizeof(size_t));
    if (!b->vis) goto nomem;
  }
  /* states in lexicographic order, first site slowest: the stored index of
   * each visible state (labels are found when asked for) */
  for (size_t s = 0; b->vis && s < n; s++) {
    size_t rem = s, stored = 0;
    size_t stride = n, sstride = m;
    for (size_t i = 0; i < count; i++) {
      const lvs_basis *f = sites[i];
      stride /= f->n;
      sstride /= f->m;
      size_t idx = rem / stride;
      rem %= stride;
      stored += (f->vis ? f->vis[idx] : idx) * sstride;
    }
    b->vis[s] = stored;
  }
  return LVS_OK;
nomem:
  st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory building a product basis");
fail:
  lvs_basis_free(b);
  *out = NULL;
  return st;
}

size_t lvs_basis_dim(const lvs_basis *b) { return b->n; }
lvs_basis_kind lvs_basis_kind_of(const lvs_basis *b) { return b->kind; }
size_t lvs_basis_sites(const lvs_basis *b) { return b->kind == LVS_BASIS_PRODUCT ? b->nsites : 1; }
const lvs_basis *lvs_basis_site(const lvs_basis *b, size_t i) {
  if (b->kind != LVS_BASIS_PRODUCT) return i == 0 ? b : NULL;
  return i < b->nsites ? b->sites[i] : NULL;
}
size_t lvs_basis_nlabels(const lvs_basis *b) { return b->nlab; }
const char *lvs_basis_label_name(const lvs_basis *b, size_t k) {
  return k < b->nlab ? b->names[k] : NULL;
}
double lvs_basis_label(const lvs_basis *b, size_t s, size_t k) {
  if (s >= b->n || k >= b->nlab) return NAN;
  if (b->kind != LVS_BASIS_PRODUCT) return b->labels[s * b->nlab + k];
  size_t rem = s, stride = b->n, col = 0;
  for (size_t i = 0; i < b->nsites; i++) {
    const lvs_basis *f = b->sites[i];
    stride /= f->n;
    size_t idx = rem / stride;
    rem %= stride;
    if (k < col + f->nlab) return f->labels[idx * f->nlab + (k - col)];
    col += f->nlab;
  }
  return NAN;
}
/* the first state whose labels match want (nlab values, within 1e-9),
 * site by site for a product */
static int labels_match(const double *have, const double *want, size_t nl) {
  size_t k = 0;
  while (k < nl && fabs(have[k] - want[k]) < 1e-9) k++;
  return k == nl;
}

int lvs_basis_find(const lvs_basis *b, const double *want, size_t *idx) {
  if (b->kind != LVS_BASIS_PRODUCT) {
    for (size_t s = 0; s < b->n; s++)
      if (labels_match(b->labels + s * b->nlab, want, b->nlab)) {
        *idx = s;
        return 1;
      }
    return 0;
  }
  size_t s = 0, col = 0;
  for (size_t i = 0; i < b->nsites; i++) {
    const lvs_basis *f = b->sites[i];
    size_t j = 0;
    while (j < f->n && !labels_match(f->labels + j * f->nlab, want + col, f->nlab)) j++;
    if (j == f->n) return 0;
    s = s * f->n + j;
    col += f->nlab;
  }
  *idx = s;
  return 1;
}

int lvsi_basis_twoS(const lvs_basis *b) { return b->twoS; }
int lvsi_basis_padded(const lvs_basis *b) { return b->vis != NULL; }

/* A basis of a kind defined in its own file (box.c, rotor.c): n states,
 * nlab labels named names[], all zero until lvsi_basis_set_label; op hands
 * out the kind's operators (identity is handled here); par[0..npar-1] are
 * kept and copied with the basis. */
int lvsi_basis_new_kind(lvs_ctx *ctx, lvs_basis_kind kind, size_t n, size_t nlab,
                        const char *const *names, lvsi_basis_op_fn op, const double *par,
                        size_t npar, lvs_basis **out) {
  *out = NULL;
  if (n == 0 || npar > LVSI_BASIS_NPAR) return lvsi_fail(ctx, LVS_EINVAL, "invalid basis kind setup");
  int st = basis_alloc(ctx, kind, n, nlab, out);
  if (st) return st;
  for (size_t k = 0; k < nlab; k++) snprintf((*out)->names[k], LABEL_LEN, "%s", names[k]);
  (*out)->kop = op;
  for (size_t k = 0; k < npar; k++) (*out)->kpar[k] = par[k];
  return LVS_OK;
}
void lvsi_basis_set_label(lvs_basis *b, size_t s, size_t k, double v) { b->labels[s * b->nlab + k] = v; }
const double *lvsi_basis_par(const lvs_basis *b) { return b->kpar; }
lvs_ctx *lvsi_basis_ctx(const lvs_basis *b) { return b->ctx; }

/* The stored (unpadded, plain) operator of a single basis. */
/* the ladder operators, x, p and n of an oscillator (stored levels) */
static int oscillator_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = b->ctx;
  size_t m = b->m;
  lvs_matrix *c = NULL;
  int st;
  int which = !strcmp(name, "lower") ? 0 : !strcmp(name, "raise") ? 1 : !strcmp(name, "x") ? 2
            : !strcmp(name, "p") ? 3 : !strcmp(name, "number") ? 4 : -1;
  if (which < 0)
    return lvsi_fail(ctx, LVS_EINVAL,
                     "oscillator has no operator '%s' (it has x, p, number, lower, raise, identity)", name);
  if ((st = lvsi_mat_alloc(ctx, m, m, which == 3, 1, 2 * m, &c))) return st;
  for (size_t j = 0; j < m; j++) {
    c->cp[j] = c->nnz;
    double up = j > 0 ? sqrt((double)j) : 0.0;  /* <j-1|a|j> */
    double dn = sqrt((double)(j + 1));           /* <j+1|a^+|j> */
    int has_dn = j + 1 < m;
    switch (which) {
      case 0: if (j > 0) st = lvsi_csc_push(c, j - 1, up); break;
      case 1: if (has_dn) st = lvsi_csc_push(c, j + 1, dn); break;
      case 2:
        if (j > 0) st = lvsi_csc_push(c, j - 1, up / sqrt(2.0));
        if (!st && has_dn) st = lvsi_csc_push(c, j + 1, dn / sqrt(2.0));
        break;
      case 3: /* p = i (a^+ - a)/sqrt 2 */
        if (j > 0) st = lvsi_csc_push(c, j - 1, -I * up / sqrt(2.0));
        if (!st && has_dn) st = lvsi_csc_push(c, j + 1, I * dn / sqrt(2.0));
        break;
      case 4: if (j > 0) st = lvsi_csc_push(c, j, (double)j); break;
    }
    if (st) {
      lvs_matrix_free(c);
      return st;
    }
  }
  c->cp[m] = c->nnz;
  *band = which == 4 ? 0 : 1;
  *out = c;
  return LVS_OK;

}

/* Sz, S+, S-, Sx, Sy of a spin, states m = S .. -S */
static int spin_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = b->ctx;
  size_t m = b->m;
  lvs_matrix *c = NULL;
  int st;
  int which = !strcmp(name, "Sz") ? 0 : !strcmp(name, "Sp") ? 1 : !strcmp(name, "Sm") ? 2
            : !strcmp(name, "Sx") ? 3 : !strcmp(name, "Sy") ? 4 : -1;
  if (which < 0)
    return lvsi_fail(ctx, LVS_EINVAL,
                     "spin has no operator '%s' (it has Sx, Sy, Sz, Sp, Sm, identity)", name);
  double S = b->twoS / 2.0;
  if ((st = lvsi_mat_alloc(ctx, m, m, which == 4, 1, 2 * m, &c))) return st;
  for (size_t j = 0; j < m; j++) {
    double mj = S - (double)j;
    /* S+ |m> = c+ |m+1>: stored row j-1; S- |m> = c- |m-1>: row j+1 */
    double cp = j > 0 ? sqrt(S * (S + 1) - mj * (mj + 1)) : 0.0;
    double cm = j + 1 < m ? sqrt(S * (S + 1) - mj * (mj - 1)) : 0.0;
    c->cp[j] = c->nnz;
    switch (which) {
      case 0: if (mj != 0.0) st = lvsi_csc_push(c, j, mj); break;
      case 1: if (j > 0) st = lvsi_csc_push(c, j - 1, cp); break;
      case 2: if (j + 1 < m) st = lvsi_csc_push(c, j + 1, cm); break;
      case 3:
        if (j > 0) st = lvsi_csc_push(c, j - 1, cp / 2);
        if (!st && j + 1 < m) st = lvsi_csc_push(c, j + 1, cm / 2);
        break;
      case 4: /* Sy = (S+ - S-)/2i */
        if (j > 0) st = lvsi_csc_push(c, j - 1, cp / (2.0 * I));
        if (!st && j + 1 < m) st = lvsi_csc_push(c, j + 1, -cm / (2.0 * I));
        break;
    }
    if (st) {
      lvs_matrix_free(c);
      return st;
    }
  }
  c->cp[m] = c->nnz;
  *band = 1;
  *out = c;
  return LVS_OK;

}

/* a named operator attached to a custom basis, as CSC */
static int custom_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = b->ctx;
  size_t m = b->m;
  lvs_matrix *c = NULL;
  int st;
  size_t k = 0;
  while (k < b->nops && strcmp(b->opnames[k], name) != 0) k++;
  if (k == b->nops) {
    char list[256] = "";
    for (size_t i = 0; i < b->nops && strlen(list) < 200; i++) {
      strcat(list, b->opnames[i]);
      strcat(list, ", ");
    }
    return lvsi_fail(ctx, LVS_EINVAL, "this basis has no operator '%s' (it has %sidentity)", name, list);
  }
  /* stored ops are plain n x n; hand out a CSC copy (products need CSC) */
  const lvs_matrix *src = b->ops[k];
  if ((st = lvsi_mat_alloc(ctx, m, m, src->cplx, 1, 4 * m, &c))) return st;
  for (size_t j = 0; j < m && !st; j++) {
    c->cp[j] = c->nnz;
    for (size_t i = 0; i < m && !st; i++) {
      double complex v = lvsi_mat_at(src, i, j);
      if (v != 0.0) st = lvsi_csc_push(c, i, v);
    }
  }
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  c->cp[m] = c->nnz;
  *band = (long)m;
  *out = c;
  return LVS_OK;

}

static int single_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = b->ctx;
  size_t m = b->m;
  lvs_matrix *c = NULL;
  int st;
  *out = NULL;
  if (strcmp(name, "identity") == 0) {
    if ((st = lvsi_mat_alloc(ctx, m, m, 0, 1, m, &c))) return st;
    for (size_t j = 0; j < m; j++) {
      c->cp[j] = c->nnz;
      lvsi_csc_push(c, j, 1.0);
    }
    c->cp[m] = c->nnz;
    *band = 0;
    *out = c;
    return LVS_OK;
  }
  if (b->kop) return b->kop(b, name, out, band);
  if (b->kind == LVS_BASIS_OSCILLATOR) return oscillator_op(b, name, out, band);
  if (b->kind == LVS_BASIS_SPIN) return spin_op(b, name, out, band);
  if (b->kind == LVS_BASIS_CUSTOM) return custom_op(b, name, out, band);
  return lvsi_fail(ctx, LVS_EINVAL, "a plain basis has no operator '%s' (it has identity)", name);
}

/* I_left (x) op (x) I_right on the stored product space, op a CSC
 * matrix of site `site`'s stored size (1-based), written in place */
static int place_csc(const lvs_basis *b, size_t site, const lvs_matrix *op, lvs_matrix **out) {
  lvs_ctx *ctx = b->ctx;
  const lvs_basis *f = b->sites[site - 1];
  size_t left = 1, right = 1;
  for (size_t i = 0; i < site - 1; i++) left *= b->sites[i]->m;
  for (size_t i = site; i < b->nsites; i++) right *= b->sites[i]->m;
  size_t fm = f->m, mm = b->m;
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, mm, mm, op->cplx, 1, left * right * (op->nnz ? op->nnz : 1), &c);
  if (st) return st;
  size_t col = 0, nnz = 0, w = op->cplx ? 2 : 1; /* the capacity is exact: entries written in place */
  for (size_t l = 0; l < left; l++)
    for (size_t j = 0; j < fm; j++)
      for (size_t r = 0; r < right; r++, col++) {
        c->cp[col] = nnz;
        for (size_t k = op->cp[j]; k < op->cp[j + 1]; k++, nnz++) {
          c->ri[nnz] = (l * fm + op->ri[k]) * right + r;
          c->a[w * nnz] = op->a[w * k];
          if (w == 2) c->a[2 * nnz + 1] = op->a[2 * k + 1];
        }
      }
  c->cp[mm] = c->nnz = nnz;
  *out = c;
  return LVS_OK;
}

int lvs_basis_op(const lvs_basis *b, size_t site, const char *name, lvs_matrix **out) {
  lvs_ctx *ctx = b->ctx;
  int st;
  long band = 0;
  *out = NULL;
  lvs_matrix *c = NULL;
  if (b->kind != LVS_BASIS_PRODUCT) {
    if (site > 1) return lvsi_fail(ctx, LVS_ERANGE, "site %zu out of range for a single basis", site);
    if ((st = single_op(b, name, &c, &band))) return st;
    c->slack = b->pad ? (long)b->pad : LVS_INF_SLACK;
  } else if (strcmp(name, "identity") == 0) {
    if ((st = lvsi_mat_alloc(ctx, b->m, b->m, 0, 1, b->m, &c))) return st;
    for (size_t j = 0; j < b->m; j++) {
      c->cp[j] = c->nnz;
      if ((st = lvsi_csc_push(c, j, 1.0))) {
        lvs_matrix_free(c);
        return st;
      }
    }
    c->cp[b->m] = c->nnz;
    c->slack = LVS_INF_SLACK;
  } else {
    if (site < 1 || site > b->nsites)
      return lvsi_fail(ctx, LVS_ERANGE, "site %zu out of range (the product has %zu sites)", site,
                       b->nsites);
    const lvs_basis *f = b->sites[site - 1];
    lvs_matrix *op;
    if ((st = single_op(f, name, &op, &band))) return st;
    st = place_csc(b, site, op, &c);
    lvs_matrix_free(op);
    if (st) return st;
    c->slack = f->pad ? (long)f->pad : LVS_INF_SLACK;
  }
  c->band = band;
  if (b->vis && (st = lvsi_set_vis(c, b->n, b->vis))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

/* checks of lvs_basis_place / lvs_localsum_place: a product, the site, no
 * padding there, a plain square matrix of the site's size */
int lvsi_place_check(const lvs_basis *b, size_t site, const lvs_matrix *m) {
  lvs_ctx *ctx = b->ctx;
  if (b->kind != LVS_BASIS_PRODUCT) return lvsi_fail(ctx, LVS_EINVAL, "place needs a product basis");
  if (site < 1 || site > b->nsites)
    return lvsi_fail(ctx, LVS_ERANGE, "site %zu out of range (the product has %zu sites)", site, b->nsites);
  const lvs_basis *f = b->sites[site - 1];
  if (f->vis)
    return lvsi_fail(ctx, LVS_EINVAL,
                     "site %zu keeps padded levels (an oscillator): a matrix of its %zu visible states cannot stand "
                     "for the padded ones; build the site's operators from its own (B.x, B.number, ...)",
                     site, f->n);
  if (m->vis || m->rows != f->n || m->cols != f->n)
    return lvsi_fail(ctx, LVS_EDIM, "place: site %zu has %zu states, the matrix is %zux%zu", site, f->n,
                     lvs_matrix_rows(m), lvs_matrix_cols(m));
  return LVS_OK;
}

int lvs_basis_place(const lvs_basis *b, size_t site, const lvs_matrix *m, lvs_matrix **out) {
  *out = NULL;
  int st = lvsi_place_check(b, site, m);
  if (st) return st;
  lvs_ctx *ctx = b->ctx;
  size_t d = m->rows;
  lvs_matrix *op = NULL, *c = NULL;
  if ((st = lvsi_mat_alloc(ctx, d, d, m->cplx, 1, m->sparse ? m->nnz + 1 : d * d + 1, &op))) return st;
  for (size_t j = 0; j < d && !st; j++) { /* m as CSC (exact zeros left out) */
    op->cp[j] = op->nnz;
    for (size_t i = 0; i < d && !st; i++) {
      double complex v = lvsi_mat_at(m, i, j);
      if (v != 0.0) st = lvsi_csc_push(op, i, v);
    }
  }
  if (!st) {
    op->cp[d] = op->nnz;
    st = place_csc(b, site, op, &c);
  }
  lvs_matrix_free(op);
  if (st) return st;
  c->slack = LVS_INF_SLACK;
  c->band = (long)b->m;
  if (b->vis && (st = lvsi_set_vis(c, b->n, b->vis))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

int lvs_basis_embed(const lvs_basis *b, const lvs_matrix *plain, lvs_matrix **out) {
  *out = NULL;
  if (plain->vis || plain->rows != b->n || plain->cols != b->n)
    return lvsi_fail(b->ctx, LVS_EDIM, "embed: need a plain %zux%zu matrix", b->n, b->n);
  if (!b->vis) return lvs_matrix_copy(plain, out);
  lvs_matrix *id;
  int st = lvs_basis_op(b, 0, "identity", &id);
  if (st) return st;
  double one[2] = {1, 0}, zero[2] = {0, 0};
  /* add() embeds the plain operand into the padded space of id */
  st = lvs_matrix_add(zero, id, one, plain, out);
  lvs_matrix_free(id);
  return st;
}

/* A custom basis: n states with nlab named labels (labels state-major,
 * n * nlab values), made by a model builder (hydrogen.c, recipes). Its
 * operators are the matrices attached with lvs_basis_custom_op. */
int lvs_basis_custom(lvs_ctx *ctx, size_t n, size_t nlab, const char *const *names,
                     const double *labels, lvs_basis **out) {
  *out = NULL;
  if (n == 0) return lvsi_fail(ctx, LVS_EINVAL, "basis size must be positive");
  if (nlab == 0 || nlab > 64) return lvsi_fail(ctx, LVS_EINVAL, "a custom basis needs 1 to 64 labels, got %zu", nlab);
  for (size_t k = 0; k < nlab; k++)
    if (!names[k] || !names[k][0] || strlen(names[k]) >= LABEL_LEN)
      return lvsi_fail(ctx, LVS_EINVAL, "label name %zu must have 1 to %d characters", k + 1, LABEL_LEN - 1);
  int st = basis_alloc(ctx, LVS_BASIS_CUSTOM, n, nlab, out);
  if (st) return st;
  for (size_t k = 0; k < nlab; k++) strcpy((*out)->names[k], names[k]);
  memcpy((*out)->labels, labels, n * nlab * sizeof(double));
  return LVS_OK;
}

/* Attach a copy of a plain n x n matrix as the operator `name` (replaces an
 * operator of the same name). */
int lvs_basis_custom_op(lvs_basis *b, const char *name, const lvs_matrix *op) {
  lvs_ctx *ctx = b->ctx;
  if (b->kind != LVS_BASIS_CUSTOM) return lvsi_fail(ctx, LVS_EINVAL, "only a custom basis takes operators");
  if (!name || !name[0] || strlen(name) >= LABEL_LEN)
    return lvsi_fail(ctx, LVS_EINVAL, "operator name must have 1 to %d characters", LABEL_LEN - 1);
  if (op->vis || op->rows != b->n || op->cols != b->n)
    return lvsi_fail(ctx, LVS_EDIM, "operator '%s' must be a plain %zux%zu matrix", name, b->n, b->n);
  lvs_matrix *c;
  int st = lvs_matrix_copy(op, &c);
  if (st) return st;
  for (size_t i = 0; i < b->nops; i++)
    if (strcmp(b->opnames[i], name) == 0) {
      lvs_matrix_free(b->ops[i]);
      b->ops[i] = c;
      return LVS_OK;
    }
  lvs_matrix **nops = lvsi_malloc(ctx, (b->nops + 1) * sizeof *nops);
  char (*nnames)[LABEL_LEN] = lvsi_malloc(ctx, (b->nops + 1) * LABEL_LEN);
  if (!nops || !nnames) {
    lvsi_free(ctx, nops);
    lvsi_free(ctx, nnames);
    lvs_matrix_free(c);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
  }
  if (b->nops) {
    memcpy(nops, b->ops, b->nops * sizeof *nops);
    memcpy(nnames, b->opnames, b->nops * LABEL_LEN);
  }
  lvsi_free(ctx, b->ops);
  lvsi_free(ctx, b->opnames);
  b->ops = nops;
  b->opnames = nnames;
  strcpy(b->opnames[b->nops], name);
  b->ops[b->nops++] = c;
  return LVS_OK;
}

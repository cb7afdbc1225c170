/* hydrogen.c -- a hydrogen-like atom (atomic units, nuclear charge Z) in a
 * basis of Coulomb-Sturmian (Laguerre) functions, diagonalized per l, m so
 * that the model's states are eigenstates of the field-free Hamiltonian:
 * the bound states the space holds exactly, approximations to the others
 * and positive-energy pseudostates that stand in for the continuum (which is
 * what makes second-order Stark sums converge to the true values).
 *
 * Functions, x = 2 kappa r, alpha = 2l + 1 (source: Rotenberg, Ann. Phys.
 * 19, 262 (1962); Laguerre facts from Abramowitz & Stegun 22.7.12, 22.7.30,
 * 22.2.12):
 *     phi_k(r) = x^(l+1) e^(-x/2) p_k(x),  p_k = L_k^(alpha) / sqrt(h_k),
 *     h_k = (k+alpha)!/k!,  so p_k are orthonormal for the weight
 *     w(x) = x^alpha e^(-x).
 * Every radial integral reduces to the Jacobi matrix J of that weight,
 *     x p_k = a_k p_(k+1) + b_k p_k + a_(k-1) p_(k-1),
 *     b_k = 2k + alpha + 1,  a_k = -sqrt((k+1)(k+alpha+1)),
 * because phi_k phi_k' r^q dr = w x^(q+1) p_k p_k' dx / (2 kappa)^(q+1):
 *     overlap S = J / (2 kappa), <1/r> = identity, <r> = J^2/(2 kappa)^2,
 *     <r^2> = J^3/(2 kappa)^3 (J taken one or two rows larger, so the
 *     products are exact inside the space).
 * The Sturmian equation (T - kappa (k+l+1)/r) phi_k = -(kappa^2/2) phi_k
 * gives H = T - Z/r = diag(kappa (k+l+1) - Z) - (kappa^2/2) S. Solving
 * H c = E S c (dsygv) gives exact energies -Z^2/(2 n^2) for every n with
 * Z/n = kappa (n - l - 1 < nfun), and upper bounds otherwise (Hylleraas-
 * Undheim / MacDonald).
 * Dipole l -> l+1: L_k^(alpha) = L_k^(alpha+2) - 2 L_(k-1)^(alpha+2) +
 * L_(k-2)^(alpha+2) (from A&S 22.7.30 twice) expresses p^(alpha) in
 * p^(alpha+2), and <phi^l_k|r|phi^(l+1)_k'> = (T J^(alpha+2))_(k k') /
 * (2 kappa)^2, again exact. Angular factor (Condon-Shortley phases; Bethe &
 * Salpeter, Quantum Mechanics of One- and Two-Electron Atoms, 1957, eq. A.22,
 * common practice): <l+1, m|cos theta|l, m> = sqrt(((l+1)^2 - m^2) /
 * ((2l+1)(2l+3))).
 */
#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define MAX_LMAX 200
#define MAX_NFUN 2000

/* Jacobi matrix of the weight x^alpha e^-x, size n (column-major). */
static void jacobi(double alpha, size_t n, double *J) {
  memset(J, 0, n * n * sizeof(double));
  for (size_t k = 0; k < n; k++) {
    J[k + k * n] = 2.0 * (double)k + alpha + 1.0;
    if (k + 1 < n) {
      double a = -sqrt(((double)k + 1.0) * ((double)k + alpha + 1.0));
      J[k + (k + 1) * n] = a;
      J[(k + 1) + k * n] = a;
    }
  }
}

/* C = A B for banded square column-major matrices of size ld (bandwidths
 * ba, bb; C gets bandwidth ba + bb, zeros elsewhere). */
static void banded_mul(size_t ld, const double *A, size_t ba, const double *B, size_t bb, double *C) {
  memset(C, 0, ld * ld * sizeof(double));
  size_t bc = ba + bb;
  for (size_t j = 0; j < ld; j++) {
    size_t i0 = j > bc ? j - bc : 0, i1 = j + bc < ld ? j + bc : ld - 1;
    for (size_t i = i0; i <= i1; i++) {
      size_t k0 = i > ba ? i - ba : 0, k1 = i + ba < ld ? i + ba : ld - 1;
      if (j > bb && j - bb > k0) k0 = j - bb;
      if (j + bb < k1) k1 = j + bb;
      double s = 0.0;
      for (size_t k = k0; k <= k1; k++) s += A[i + k * ld] * B[k + j * ld];
      C[i + j * ld] = s;
    }
  }
}

/* out(na x nb) = Ca^T M Cb with M na x nb (all column-major, ld = rows). */
static void sandwich(size_t na, size_t nb, const double *Ca, const double *M, size_t ldm,
                     const double *Cb, double *tmp, double *out) {
  int a = (int)na, b = (int)nb;
  cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, a, b, b, 1.0, M, (int)ldm, Cb, b, 0.0, tmp, a);
  cblas_dgemm(CblasColMajor, CblasTrans, CblasNoTrans, a, b, a, 1.0, Ca, a, tmp, a, 0.0, out, a);
}

typedef struct {
  double e;
  int l, m, i;
} hstate;

static int cmp_state(const void *x, const void *y) {
  const hstate *a = x, *b = y;
  if (a->e != b->e) return a->e < b->e ? -1 : 1;
  if (a->l != b->l) return a->l < b->l ? -1 : 1;
  if (a->m != b->m) return a->m < b->m ? -1 : 1;
  return a->i < b->i ? -1 : (a->i > b->i);
}

static int cmp_lmi(const void *x, const void *y) {
  const hstate *a = x, *b = y;
  if (a->l != b->l) return a->l < b->l ? -1 : 1;
  if (a->m != b->m) return a->m < b->m ? -1 : 1;
  return a->i < b->i ? -1 : (a->i > b->i);
}

typedef struct {
  size_t n, cap;
  size_t *i, *j;
  double *v;
} trip;

static int trip_add(lvs_ctx *ctx, trip *t, size_t i, size_t j, double v) {
  if (v == 0.0) return LVS_OK;
  if (t->n == t->cap) {
    size_t cap = t->cap ? 2 * t->cap : 256;
    size_t *ni = lvsi_malloc(ctx, cap * sizeof(size_t)), *nj = lvsi_malloc(ctx, cap * sizeof(size_t));
    double *nv = lvsi_malloc(ctx, cap * sizeof(double));
    if (!ni || !nj || !nv) {
      lvsi_free(ctx, ni);
      lvsi_free(ctx, nj);
      lvsi_free(ctx, nv);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory building hydrogen operators");
    }
    if (t->n) {
      memcpy(ni, t->i, t->n * sizeof(size_t));
      memcpy(nj, t->j, t->n * sizeof(size_t));
      memcpy(nv, t->v, t->n * sizeof(double));
    }
    lvsi_free(ctx, t->i);
    lvsi_free(ctx, t->j);
    lvsi_free(ctx, t->v);
    t->i = ni;
    t->j = nj;
    t->v = nv;
    t->cap = cap;
  }
  t->i[t->n] = i;
  t->j[t->n] = j;
  t->v[t->n] = v;
  t->n++;
  return LVS_OK;
}

static void trip_free(lvs_ctx *ctx, trip *t) {
  lvsi_free(ctx, t->i);
  lvsi_free(ctx, t->j);
  lvsi_free(ctx, t->v);
  memset(t, 0, sizeof *t);
}

/* Attach the operator in t to b under name. */
static int attach_as(lvs_basis *b, lvs_ctx *ctx, size_t dim, trip *t, const char *name, int imag) {
  lvs_matrix *op = NULL;
  double *zero = NULL;
  int st = LVS_OK;
  if (imag && !(zero = lvsi_calloc(ctx, t->n ? t->n : 1, sizeof(double))))
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory building hydrogen operators");
  if (!st)
    st = lvs_matrix_from_triplets(ctx, dim, dim, t->n, t->i, t->j, imag ? zero : t->v, imag ? t->v : NULL, &op);
  if (!st) st = lvs_basis_custom_op(b, name, op);
  lvs_matrix_free(op);
  lvsi_free(ctx, zero);
  trip_free(ctx, t);
  return st;
}
static int attach(lvs_basis *b, lvs_ctx *ctx, size_t dim, trip *t, const char *name) {
  return attach_as(b, ctx, dim, t, name, 0);
}

/* ---- lvs_coulomb_basis, phase by phase --------------------------------
 * check the parameters, allocate, per l the generalized eigenproblem with
 * its phases and radial r, r^2 (cb_radial), the l -> l+1 radial dipole
 * (cb_dipole), the states sorted by energy with their labels (cb_states),
 * then the operators: diagonal H0, L2, Lz; r, r2 inside each (l, m) block;
 * z; x and y (cb_attach_*). */
typedef struct {
  lvs_ctx *ctx;
  int lmin, lmax, all_m, mfix;
  double kappa, Z;
  size_t N, P, L1, dim; /* functions per l, padded Jacobi size, l count, states */
  double *E, *C, *R1, *R2, *D;   /* per l: energies, coefficients, <r>, <r^2>, <l|r|l+1> */
  double *J, *J2, *J3, *S, *M, *tmp; /* work */
  hstate *sts;
  size_t *rank;
  double *labels;
} cb_work;

/* first index of the (l, m) block in the block order: ((l, m) block) * N */
static size_t cb_block(const cb_work *w, int l, int m) {
  return (w->all_m ? (size_t)(l * l + l + m) : (size_t)(l - w->lmin)) * w->N;
}

static int cb_check(lvs_ctx *ctx, const lvs_coulomb_spec *spec) {
  if (!spec) return lvsi_fail(ctx, LVS_EINVAL, "coulomb basis: no parameters given");
  int lmax = spec->lmax, nf = spec->nfun, all_m = spec->all_m != 0, mfix = spec->m;
  double kappa = spec->kappa, Z = spec->Z;
  if (lmax < 0 || lmax > MAX_LMAX)
    return lvsi_fail(ctx, LVS_EINVAL, "lmax must be from 0 to %d, got %d", MAX_LMAX, lmax);
  if (nf < 1 || nf > MAX_NFUN)
    return lvsi_fail(ctx, LVS_EINVAL, "functions per l must be from 1 to %d, got %d", MAX_NFUN, nf);
  if (!(kappa > 0.0) || !isfinite(kappa))
    return lvsi_fail(ctx, LVS_EINVAL, "kappa must be positive and finite, got %g", kappa);
  if (!(Z > 0.0) || !isfinite(Z))
    return lvsi_fail(ctx, LVS_EINVAL, "nuclear charge Z must be positive and finite, got %g", Z);
  if (!all_m && (mfix > lmax || mfix < -lmax))
    return lvsi_fail(ctx, LVS_EINVAL, "|m| = %d exceeds lmax = %d (no state has it)", abs(mfix), lmax);
  return LVS_OK;
}

static void cb_free(cb_work *w) {
  lvs_ctx *ctx = w->ctx;
  lvsi_free(ctx, w->E);
  lvsi_free(ctx, w->C);
  lvsi_free(ctx, w->R1);
  lvsi_free(ctx, w->R2);
  lvsi_free(ctx, w->D);
  lvsi_free(ctx, w->J);
  lvsi_free(ctx, w->J2);
  lvsi_free(ctx, w->J3);
  lvsi_free(ctx, w->S);
  lvsi_free(ctx, w->M);
  lvsi_free(ctx, w->tmp);
  lvsi_free(ctx, w->sts);
  lvsi_free(ctx, w->rank);
  lvsi_free(ctx, w->labels);
}

/* sizes from the checked spec, the caps, the work arrays */
static int cb_alloc(cb_work *w, lvs_ctx *ctx, const lvs_coulomb_spec *spec) {
  memset(w, 0, sizeof *w);
  w->ctx = ctx;
  w->lmax = spec->lmax;
  w->all_m = spec->all_m != 0;
  w->mfix = spec->m;
  w->kappa = spec->kappa;
  w->Z = spec->Z;
  size_t N = (size_t)spec->nfun, L1 = (size_t)w->lmax + 1;
  w->N = N;
  w->L1 = L1;
  w->lmin = w->all_m ? 0 : abs(w->mfix);
  size_t nlm = 0; /* (l, m) blocks */
  for (int l = w->lmin; l <= w->lmax; l++) nlm += w->all_m ? (size_t)(2 * l + 1) : 1;
  size_t dim = w->dim = nlm * N;
  int st;
  if ((st = lvsi_dense_ok(ctx, dim, dim, sizeof(double), "coulomb basis"))) return st;
  if ((st = lvsi_dense_ok(ctx, L1 * N, N + 2, 4 * sizeof(double), "coulomb basis (radial work)"))) return st;
  size_t P = w->P = N + 2; /* padded Jacobi size */
  w->E = lvsi_calloc(ctx, L1 * N, sizeof(double));
  w->C = lvsi_calloc(ctx, L1 * N * N, sizeof(double));
  w->R1 = lvsi_calloc(ctx, L1 * N * N, sizeof(double));
  w->R2 = lvsi_calloc(ctx, L1 * N * N, sizeof(double));
  w->D = lvsi_calloc(ctx, L1 * N * N, sizeof(double));
  w->J = lvsi_malloc(ctx, P * P * sizeof(double));
  w->J2 = lvsi_malloc(ctx, P * P * sizeof(double));
  w->J3 = lvsi_malloc(ctx, P * P * sizeof(double));
  w->S = lvsi_malloc(ctx, N * N * sizeof(double));
  w->M = lvsi_malloc(ctx, N * N * sizeof(double));
  w->tmp = lvsi_malloc(ctx, N * N * sizeof(double));
  w->sts = lvsi_malloc(ctx, dim * sizeof(hstate));
  w->rank = lvsi_malloc(ctx, dim * sizeof(size_t));
  w->labels = lvsi_malloc(ctx, 3 * dim * sizeof(double));
  if (!w->E || !w->C || !w->R1 || !w->R2 || !w->D || !w->J || !w->J2 || !w->J3 || !w->S || !w->M ||
      !w->tmp || !w->sts || !w->rank || !w->labels)
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory building a coulomb basis");
  return LVS_OK;
}

/* for one l: the generalized eigenproblem, phases, radial r and r^2 */
static int cb_radial(cb_work *w, int l) {
  lvs_ctx *ctx = w->ctx;
  size_t N = w->N, P = w->P;
  double kappa = w->kappa, Z = w->Z;
  double *E = w->E, *S = w->S, *J = w->J, *J2 = w->J2, *J3 = w->J3, *M = w->M;
  double alpha = 2.0 * l + 1.0, tk = 2.0 * kappa;
  double *c = w->C + (size_t)l * N * N;
  jacobi(alpha, P, J);
  for (size_t j = 0; j < N; j++)
    for (size_t i = 0; i < N; i++) S[i + j * N] = J[i + j * P] / tk;
  for (size_t j = 0; j < N; j++)
    for (size_t i = 0; i < N; i++)
      c[i + j * N] = -0.5 * kappa * kappa * S[i + j * N] + (i == j ? kappa * ((double)i + l + 1.0) - Z : 0.0);
  for (size_t q = 0; q < N * N; q++)
    if (!isfinite(c[q]) || !isfinite(S[q]))
      return lvsi_fail(ctx, LVS_EINVAL, "kappa = %g with Z = %g overflows the matrix elements at l = %d (use a kappa near Z/n)",
                       kappa, Z, l);
  lapack_int info = LAPACKE_dsygv(LAPACK_COL_MAJOR, 1, 'V', 'L', (lapack_int)N, c, (lapack_int)N, S,
                                  (lapack_int)N, E + (size_t)l * N);
  if (info < 0) return lvsi_fail(ctx, LVS_EINVAL, "dsygv: argument %d is invalid", (int)-info);
  if (info > 0)
    return lvsi_fail(ctx, LVS_ELAPACK, "dsygv failed for l = %d (info %d): the overlap is not positive definite",
                     l, (int)info);
  for (size_t q = 0; q < N; q++)
    if (!isfinite(E[(size_t)l * N + q]))
      return lvsi_fail(ctx, LVS_EINVAL, "kappa = %g with Z = %g gives non-finite energies at l = %d (use a kappa near Z/n)",
                       kappa, Z, l);
  /* phase: the radial function is positive near r = 0, where
   * p_k(0) is proportional to sqrt((k+alpha)!/k!) > 0 */
  for (size_t j = 0; j < N; j++) {
    double s = 0.0;
    for (size_t k = 0; k < N; k++)
      s += c[k + j * N] * exp(0.5 * (lgamma((double)k + alpha + 1.0) - lgamma((double)k + 1.0) -
                                    lgamma(alpha + 1.0)));
    if (s < 0.0)
      for (size_t k = 0; k < N; k++) c[k + j * N] = -c[k + j * N];
  }
  banded_mul(P, J, 1, J, 1, J2);
  banded_mul(P, J2, 2, J, 1, J3);
  for (size_t j = 0; j < N; j++)
    for (size_t i = 0; i < N; i++) M[i + j * N] = J2[i + j * P] / (tk * tk);
  sandwich(N, N, c, M, N, c, w->tmp, w->R1 + (size_t)l * N * N);
  for (size_t j = 0; j < N; j++)
    for (size_t i = 0; i < N; i++) M[i + j * N] = J3[i + j * P] / (tk * tk * tk);
  sandwich(N, N, c, M, N, c, w->tmp, w->R2 + (size_t)l * N * N);
  return LVS_OK;
}

/* l -> l+1 radial dipole: D_l = C_l^T (T J^(alpha+2) / (2 kappa)^2) C_(l+1) */
static void cb_dipole(cb_work *w) {
  size_t N = w->N;
  double *J = w->J, *M = w->M, *C = w->C;
  for (int l = w->lmin; l < w->lmax; l++) {
    double alpha = 2.0 * l + 1.0, tk = 2.0 * w->kappa;
    jacobi(alpha + 2.0, N, J); /* N x N, ld N */
    static const double cd[3] = {1.0, -2.0, 1.0};
    for (size_t kp = 0; kp < N; kp++)
      for (size_t k = 0; k < N; k++) {
        double s = 0.0;
        for (size_t d = 0; d < 3 && d <= k; d++) {
          size_t jj = k - d;
          if (jj + 1 < kp || jj > kp + 1) continue; /* J is tridiagonal */
          double lt = 0.5 * (lgamma((double)jj + alpha + 3.0) - lgamma((double)jj + 1.0) -
                             lgamma((double)k + alpha + 1.0) + lgamma((double)k + 1.0));
          s += cd[d] * exp(lt) * J[jj + kp * N];
        }
        M[k + kp * N] = s / (tk * tk);
      }
    sandwich(N, N, C + (size_t)l * N * N, M, N, C + (size_t)(l + 1) * N * N, w->tmp, w->D + (size_t)l * N * N);
  }
}

/* states sorted by energy; near-equal energies (within 1e-9 relative)
 * ordered by l, m, rank so degenerate shells come out the same way on
 * every machine; rank[block index] = sorted position; labels n, l, m */
static int cb_states(cb_work *w) {
  size_t N = w->N, dim = w->dim;
  hstate *sts = w->sts;
  for (size_t q = 0; q < w->L1 * N * N; q++)
    if (!isfinite(w->R1[q]) || !isfinite(w->R2[q]) || !isfinite(w->D[q]))
      return lvsi_fail(w->ctx, LVS_EINVAL, "kappa = %g with Z = %g overflows the radial integrals (use a kappa near Z/n)",
                       w->kappa, w->Z);
  size_t u = 0;
  for (int l = w->lmin; l <= w->lmax; l++) {
    int m0 = w->all_m ? -l : w->mfix, m1 = w->all_m ? l : w->mfix;
    for (int m = m0; m <= m1; m++)
      for (size_t i = 0; i < N; i++, u++) {
        sts[u].e = w->E[(size_t)l * N + i];
        sts[u].l = l;
        sts[u].m = m;
        sts[u].i = (int)i;
      }
  }
  qsort(sts, dim, sizeof(hstate), cmp_state);
  for (size_t a = 0; a < dim;) {
    size_t z = a + 1;
    while (z < dim && fabs(sts[z].e - sts[z - 1].e) <= 1e-9 * fmax(1.0, fabs(sts[z].e))) z++;
    if (z - a > 1) qsort(sts + a, z - a, sizeof(hstate), cmp_lmi);
    a = z;
  }
  for (size_t s = 0; s < dim; s++) {
    w->rank[cb_block(w, sts[s].l, sts[s].m) + (size_t)sts[s].i] = s;
    w->labels[3 * s] = (double)(sts[s].i + sts[s].l + 1);
    w->labels[3 * s + 1] = (double)sts[s].l;
    w->labels[3 * s + 2] = (double)sts[s].m;
  }
  return LVS_OK;
}

/* H0, L2, Lz: diagonal */
static int cb_attach_diag(const cb_work *w, lvs_basis *b, trip *t) {
  lvs_ctx *ctx = w->ctx;
  const hstate *sts = w->sts;
  int st = LVS_OK;
  for (size_t s = 0; s < w->dim && !st; s++) st = trip_add(ctx, t, s, s, sts[s].e);
  if (st || (st = attach(b, ctx, w->dim, t, "H0"))) return st;
  for (size_t s = 0; s < w->dim && !st; s++) st = trip_add(ctx, t, s, s, (double)sts[s].l * (sts[s].l + 1.0));
  if (st || (st = attach(b, ctx, w->dim, t, "L2"))) return st;
  for (size_t s = 0; s < w->dim && !st; s++) st = trip_add(ctx, t, s, s, (double)sts[s].m);
  if (st || (st = attach(b, ctx, w->dim, t, "Lz"))) return st;
  return LVS_OK;
}

/* r and r^2: inside each (l, m) block */
static int cb_attach_radial(const cb_work *w, lvs_basis *b, trip *t) {
  size_t N = w->N;
  const size_t *rank = w->rank;
  int st = LVS_OK;
  for (int pw = 1; pw <= 2; pw++) {
    const double *R = pw == 1 ? w->R1 : w->R2;
    for (int l = w->lmin; l <= w->lmax && !st; l++) {
      int m0 = w->all_m ? -l : w->mfix, m1 = w->all_m ? l : w->mfix;
      for (int m = m0; m <= m1 && !st; m++)
        for (size_t j = 0; j < N && !st; j++)
          for (size_t i = 0; i < N && !st; i++)
            st = trip_add(w->ctx, t, rank[cb_block(w, l, m) + i], rank[cb_block(w, l, m) + j],
                          R[(size_t)l * N * N + i + j * N]);
    }
    if (st || (st = attach(b, w->ctx, w->dim, t, pw == 1 ? "r" : "r2"))) return st;
  }
  return LVS_OK;
}

/* z = r cos(theta): (l, m) <-> (l+1, m) */
static int cb_attach_z(const cb_work *w, lvs_basis *b, trip *t) {
  size_t N = w->N;
  const size_t *rank = w->rank;
  int st = LVS_OK;
  for (int l = w->lmin; l < w->lmax && !st; l++) {
    int m0 = w->all_m ? -l : w->mfix, m1 = w->all_m ? l : w->mfix;
    for (int m = m0; m <= m1 && !st; m++) {
      double ang = sqrt((((double)l + 1.0) * (l + 1.0) - (double)m * m) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)));
      for (size_t j = 0; j < N && !st; j++)
        for (size_t i = 0; i < N && !st; i++) {
          double v = ang * w->D[(size_t)l * N * N + i + j * N];
          size_t a = rank[cb_block(w, l, m) + i], c2 = rank[cb_block(w, l + 1, m) + j];
          st = trip_add(w->ctx, t, a, c2, v);
          if (!st) st = trip_add(w->ctx, t, c2, a, v);
        }
    }
  }
  if (st || (st = attach(b, w->ctx, w->dim, t, "z"))) return st;
  return LVS_OK;
}

/* x and y (every m present): r sin(theta) e^(+-i phi) takes (l, m) to
 * (l+1, m+-1) with (Condon-Shortley phases; source: Y_lm recurrences,
 * e.g. Bethe & Salpeter 1957, appendix, common practice)
 *   <l+1, m+1|sin(theta) e^(i phi)|l, m>  = -sqrt((l+m+1)(l+m+2)/((2l+1)(2l+3)))
 *   <l+1, m-1|sin(theta) e^(-i phi)|l, m> = +sqrt((l-m+1)(l-m+2)/((2l+1)(2l+3)))
 * x = (S+ + S-)/2, y = (S+ - S-)/(2i); checked by rotational invariance
 * (H0 + F x and H0 + F z have the same spectrum) in the C test. */
static int cb_attach_xy(const cb_work *w, lvs_basis *b, trip *t) {
  size_t N = w->N;
  const size_t *rank = w->rank;
  int st = LVS_OK;
  for (int pass = 0; pass < 2 && w->all_m; pass++) {
    for (int l = w->lmin; l < w->lmax && !st; l++)
      for (int m = -l; m <= l && !st; m++)
        for (int sg = -1; sg <= 1 && !st; sg += 2) {
          double ap = sg > 0 ? -sqrt(((double)l + m + 1.0) * (l + m + 2.0) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)))
                             : sqrt(((double)l - m + 1.0) * (l - m + 2.0) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)));
          for (size_t j = 0; j < N && !st; j++)
            for (size_t i = 0; i < N && !st; i++) {
              double v = 0.5 * ap * w->D[(size_t)l * N * N + i + j * N];
              size_t a = rank[cb_block(w, l, m) + i], c2 = rank[cb_block(w, l + 1, m + sg) + j];
              /* x: v both ways; y: (c2, a) = -i sg v, (a, c2) = +i sg v */
              double up = pass == 0 ? v : -sg * v, dn = pass == 0 ? v : sg * v;
              st = trip_add(w->ctx, t, c2, a, up);
              if (!st) st = trip_add(w->ctx, t, a, c2, dn);
            }
        }
    if (st || (st = attach_as(b, w->ctx, w->dim, t, pass == 0 ? "x" : "y", pass))) return st;
  }
  return LVS_OK;
}

int lvs_coulomb_basis(lvs_ctx *ctx, const lvs_coulomb_spec *spec, lvs_basis **out) {
  *out = NULL;
  int st = cb_check(ctx, spec);
  if (st) return st;
  cb_work w;
  lvs_basis *b = NULL;
  trip t = {0};
  if ((st = cb_alloc(&w, ctx, spec))) goto done;
  for (int l = w.lmin; l <= w.lmax; l++)
    if ((st = cb_radial(&w, l))) goto done;
  cb_dipole(&w);
  if ((st = cb_states(&w))) goto done;
  static const char *const names[3] = {"n", "l", "m"};
  if ((st = lvs_basis_custom(ctx, w.dim, 3, names, w.labels, &b))) goto done;
  if ((st = cb_attach_diag(&w, b, &t)) || (st = cb_attach_radial(&w, b, &t)) ||
      (st = cb_attach_z(&w, b, &t)) || (st = cb_attach_xy(&w, b, &t)))
    goto done;
  *out = b;
  b = NULL;
done:
  trip_free(ctx, &t);
  lvs_basis_free(b);
  cb_free(&w);
  return st;
}

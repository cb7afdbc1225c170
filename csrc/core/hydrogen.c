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

int lvs_coulomb_basis(lvs_ctx *ctx, const lvs_coulomb_spec *spec, lvs_basis **out) {
  *out = NULL;
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

  size_t N = (size_t)nf, L1 = (size_t)lmax + 1;
  int lmin = all_m ? 0 : abs(mfix);
  size_t nlm = 0; /* (l, m) blocks */
  for (int l = lmin; l <= lmax; l++) nlm += all_m ? (size_t)(2 * l + 1) : 1;
  size_t dim = nlm * N;
  int st;
  if ((st = lvsi_dense_ok(ctx, dim, dim, sizeof(double), "coulomb basis"))) return st;
  if ((st = lvsi_dense_ok(ctx, L1 * N, N + 2, 4 * sizeof(double), "coulomb basis (radial work)"))) return st;

  size_t P = N + 2; /* padded Jacobi size */
  double *E = lvsi_calloc(ctx, L1 * N, sizeof(double));      /* energies per l */
  double *C = lvsi_calloc(ctx, L1 * N * N, sizeof(double));   /* coefficients per l */
  double *R1 = lvsi_calloc(ctx, L1 * N * N, sizeof(double));  /* <i|r|j> per l */
  double *R2 = lvsi_calloc(ctx, L1 * N * N, sizeof(double));  /* <i|r^2|j> per l */
  double *D = lvsi_calloc(ctx, L1 * N * N, sizeof(double));   /* <i,l|r|j,l+1> */
  double *J = lvsi_malloc(ctx, P * P * sizeof(double));
  double *J2 = lvsi_malloc(ctx, P * P * sizeof(double));
  double *J3 = lvsi_malloc(ctx, P * P * sizeof(double));
  double *S = lvsi_malloc(ctx, N * N * sizeof(double));
  double *M = lvsi_malloc(ctx, N * N * sizeof(double));
  double *tmp = lvsi_malloc(ctx, N * N * sizeof(double));
  hstate *sts = lvsi_malloc(ctx, dim * sizeof(hstate));
  size_t *rank = lvsi_malloc(ctx, dim * sizeof(size_t));
  double *labels = lvsi_malloc(ctx, 3 * dim * sizeof(double));
  lvs_basis *b = NULL;
  trip t = {0};
  if (!E || !C || !R1 || !R2 || !D || !J || !J2 || !J3 || !S || !M || !tmp || !sts || !rank || !labels) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory building a coulomb basis");
    goto done;
  }

  /* per l: generalized eigenproblem, phases, radial r and r^2 */
  for (int l = lmin; l <= lmax; l++) {
    double alpha = 2.0 * l + 1.0, tk = 2.0 * kappa;
    double *c = C + (size_t)l * N * N;
    jacobi(alpha, P, J);
    for (size_t j = 0; j < N; j++)
      for (size_t i = 0; i < N; i++) S[i + j * N] = J[i + j * P] / tk;
    for (size_t j = 0; j < N; j++)
      for (size_t i = 0; i < N; i++)
        c[i + j * N] = -0.5 * kappa * kappa * S[i + j * N] + (i == j ? kappa * ((double)i + l + 1.0) - Z : 0.0);
    for (size_t q = 0; q < N * N; q++)
      if (!isfinite(c[q]) || !isfinite(S[q])) {
        st = lvsi_fail(ctx, LVS_EINVAL, "kappa = %g with Z = %g overflows the matrix elements at l = %d (use a kappa near Z/n)",
                       kappa, Z, l);
        goto done;
      }
    lapack_int info = LAPACKE_dsygv(LAPACK_COL_MAJOR, 1, 'V', 'L', (lapack_int)N, c, (lapack_int)N, S,
                                    (lapack_int)N, E + (size_t)l * N);
    if (info < 0) {
      st = lvsi_fail(ctx, LVS_EINVAL, "dsygv: argument %d is invalid", (int)-info);
      goto done;
    }
    if (info > 0) {
      st = lvsi_fail(ctx, LVS_ELAPACK, "dsygv failed for l = %d (info %d): the overlap is not positive definite",
                     l, (int)info);
      goto done;
    }
    for (size_t q = 0; q < N; q++)
      if (!isfinite(E[(size_t)l * N + q])) {
        st = lvsi_fail(ctx, LVS_EINVAL, "kappa = %g with Z = %g gives non-finite energies at l = %d (use a kappa near Z/n)",
                       kappa, Z, l);
        goto done;
      }
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
    sandwich(N, N, c, M, N, c, tmp, R1 + (size_t)l * N * N);
    for (size_t j = 0; j < N; j++)
      for (size_t i = 0; i < N; i++) M[i + j * N] = J3[i + j * P] / (tk * tk * tk);
    sandwich(N, N, c, M, N, c, tmp, R2 + (size_t)l * N * N);
  }
  /* l -> l+1 radial dipole: D_l = C_l^T (T J^(alpha+2) / (2 kappa)^2) C_(l+1) */
  for (int l = lmin; l < lmax; l++) {
    double alpha = 2.0 * l + 1.0, tk = 2.0 * kappa;
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
    sandwich(N, N, C + (size_t)l * N * N, M, N, C + (size_t)(l + 1) * N * N, tmp, D + (size_t)l * N * N);
  }

  for (size_t q = 0; q < L1 * N * N; q++)
    if (!isfinite(R1[q]) || !isfinite(R2[q]) || !isfinite(D[q])) {
      st = lvsi_fail(ctx, LVS_EINVAL, "kappa = %g with Z = %g overflows the radial integrals (use a kappa near Z/n)",
                     kappa, Z);
      goto done;
    }
  /* states, sorted by energy; near-equal energies (within 1e-9 relative)
   * ordered by l, m, rank so degenerate shells come out the same way on
   * every machine */
  size_t u = 0;
  for (int l = lmin; l <= lmax; l++) {
    int m0 = all_m ? -l : mfix, m1 = all_m ? l : mfix;
    for (int m = m0; m <= m1; m++)
      for (size_t i = 0; i < N; i++, u++) {
        sts[u].e = E[(size_t)l * N + i];
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
  /* rank[block index] = sorted position; block index = ((l,m) block) * N + i */
#define BLOCK(l, m) ((all_m ? (size_t)((l) * (l) + (l) + (m)) : (size_t)((l) - lmin)) * N)
  for (size_t s = 0; s < dim; s++) {
    rank[BLOCK(sts[s].l, sts[s].m) + (size_t)sts[s].i] = s;
    labels[3 * s] = (double)(sts[s].i + sts[s].l + 1);
    labels[3 * s + 1] = (double)sts[s].l;
    labels[3 * s + 2] = (double)sts[s].m;
  }
  static const char *const names[3] = {"n", "l", "m"};
  if ((st = lvs_basis_custom(ctx, dim, 3, names, labels, &b))) goto done;

  /* H0, L2, Lz: diagonal */
  for (size_t s = 0; s < dim && !st; s++) st = trip_add(ctx, &t, s, s, sts[s].e);
  if (st || (st = attach(b, ctx, dim, &t, "H0"))) goto done;
  for (size_t s = 0; s < dim && !st; s++) st = trip_add(ctx, &t, s, s, (double)sts[s].l * (sts[s].l + 1.0));
  if (st || (st = attach(b, ctx, dim, &t, "L2"))) goto done;
  for (size_t s = 0; s < dim && !st; s++) st = trip_add(ctx, &t, s, s, (double)sts[s].m);
  if (st || (st = attach(b, ctx, dim, &t, "Lz"))) goto done;
  /* r and r^2: inside each (l, m) block */
  for (int pw = 1; pw <= 2; pw++) {
    const double *R = pw == 1 ? R1 : R2;
    for (int l = lmin; l <= lmax && !st; l++) {
      int m0 = all_m ? -l : mfix, m1 = all_m ? l : mfix;
      for (int m = m0; m <= m1 && !st; m++)
        for (size_t j = 0; j < N && !st; j++)
          for (size_t i = 0; i < N && !st; i++)
            st = trip_add(ctx, &t, rank[BLOCK(l, m) + i], rank[BLOCK(l, m) + j], R[(size_t)l * N * N + i + j * N]);
    }
    if (st || (st = attach(b, ctx, dim, &t, pw == 1 ? "r" : "r2"))) goto done;
  }
  /* z = r cos(theta): (l, m) <-> (l+1, m) */
  for (int l = lmin; l < lmax && !st; l++) {
    int m0 = all_m ? -l : mfix, m1 = all_m ? l : mfix;
    for (int m = m0; m <= m1 && !st; m++) {
      double ang = sqrt((((double)l + 1.0) * (l + 1.0) - (double)m * m) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)));
      for (size_t j = 0; j < N && !st; j++)
        for (size_t i = 0; i < N && !st; i++) {
          double v = ang * D[(size_t)l * N * N + i + j * N];
          size_t a = rank[BLOCK(l, m) + i], c2 = rank[BLOCK(l + 1, m) + j];
          st = trip_add(ctx, &t, a, c2, v);
          if (!st) st = trip_add(ctx, &t, c2, a, v);
        }
    }
  }
  if (st || (st = attach(b, ctx, dim, &t, "z"))) goto done;
  /* x and y (every m present): r sin(theta) e^(+-i phi) takes (l, m) to
   * (l+1, m+-1) with (Condon-Shortley phases; source: Y_lm recurrences,
   * e.g. Bethe & Salpeter 1957, appendix, common practice)
   *   <l+1, m+1|sin(theta) e^(i phi)|l, m>  = -sqrt((l+m+1)(l+m+2)/((2l+1)(2l+3)))
   *   <l+1, m-1|sin(theta) e^(-i phi)|l, m> = +sqrt((l-m+1)(l-m+2)/((2l+1)(2l+3)))
   * x = (S+ + S-)/2, y = (S+ - S-)/(2i); checked by rotational invariance
   * (H0 + F x and H0 + F z have the same spectrum) in the C test. */
  for (int pass = 0; pass < 2 && all_m; pass++) {
    for (int l = lmin; l < lmax && !st; l++)
      for (int m = -l; m <= l && !st; m++)
        for (int sg = -1; sg <= 1 && !st; sg += 2) {
          double ap = sg > 0 ? -sqrt(((double)l + m + 1.0) * (l + m + 2.0) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)))
                             : sqrt(((double)l - m + 1.0) * (l - m + 2.0) / ((2.0 * l + 1.0) * (2.0 * l + 3.0)));
          for (size_t j = 0; j < N && !st; j++)
            for (size_t i = 0; i < N && !st; i++) {
              double v = 0.5 * ap * D[(size_t)l * N * N + i + j * N];
              size_t a = rank[BLOCK(l, m) + i], c2 = rank[BLOCK(l + 1, m + sg) + j];
              /* x: v both ways; y: (c2, a) = -i sg v, (a, c2) = +i sg v */
              double up = pass == 0 ? v : -sg * v, dn = pass == 0 ? v : sg * v;
              st = trip_add(ctx, &t, c2, a, up);
              if (!st) st = trip_add(ctx, &t, a, c2, dn);
            }
        }
    if (st || (st = attach_as(b, ctx, dim, &t, pass == 0 ? "x" : "y", pass))) goto done;
  }
#undef BLOCK
  *out = b;
  b = NULL;
done:
  trip_free(ctx, &t);
  lvs_basis_free(b);
  lvsi_free(ctx, E);
  lvsi_free(ctx, C);
  lvsi_free(ctx, R1);
  lvsi_free(ctx, R2);
  lvsi_free(ctx, D);
  lvsi_free(ctx, J);
  lvsi_free(ctx, J2);
  lvsi_free(ctx, J3);
  lvsi_free(ctx, S);
  lvsi_free(ctx, M);
  lvsi_free(ctx, tmp);
  lvsi_free(ctx, sts);
  lvsi_free(ctx, rank);
  lvsi_free(ctx, labels);
  return st;
}

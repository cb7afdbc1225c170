/* rotor.c -- rigid rotor |J M> states and Clebsch-Gordan coefficients.
 *
 * Clebsch-Gordan by Racah's closed formula (Racah, Phys. Rev. 62, 438
 * (1942), eq. 16'; the same form in Edmonds, Angular Momentum in Quantum
 * Mechanics, 1957, eq. 3.6.11):
 *   <j1 m1 j2 m2|J M> = delta(M, m1 + m2)
 *     sqrt((2J+1) (J+j1-j2)! (J-j1+j2)! (j1+j2-J)! / (j1+j2+J+1)!)
 *     sqrt((J+M)! (J-M)! (j1-m1)! (j1+m1)! (j2-m2)! (j2+m2)!)
 *     sum_k (-1)^k / [k! (j1+j2-J-k)! (j1-m1-k)! (j2+m2-k)! (J-j2+m1+k)! (J-j1-m2+k)!]
 * Each term is formed in long double from log-gamma, so the only loss is
 * the cancellation of the alternating sum (none when one j is small).
 *
 * cos theta = sqrt(4 pi/3) Y_10, and by the Wigner-Eckart theorem for
 * spherical harmonics (Edmonds eq. 4.6.3 in CG form)
 *   <J' M|cos theta|J M> = sqrt((2J+1)/(2J'+1)) <J 0 1 0|J' 0> <J M 1 0|J' M>,
 * nonzero for J' = J +- 1 only; this equals the closed form
 * sqrt(((J+1)^2 - M^2)/((2J+1)(2J+3))) for J' = J + 1 (checked in the specs).
 * cos^2 theta = 1/3 + (2/3) P2(cos theta), with the same theorem for
 * P2 = sqrt(4 pi/5) Y_20:
 *   <J' M|P2|J M> = sqrt((2J+1)/(2J'+1)) <J 0 2 0|J' 0> <J M 2 0|J' M>,
 * J' = J, J +- 2; so "cos2" is exact up to J = Jmax, where the product of
 * two truncated cos matrices misses the J = Jmax + 1 states.
 * Jp|J M> = sqrt(J(J+1) - M(M+1)) |J M+1> (Condon-Shortley phase).
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define ROTOR_MAX_J 2000
#define CG_MAX_TWOJ 2000

enum { P_JMAX = 0, P_ALLM = 1, P_M = 2 };

static int rotor_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band);

int lvs_basis_rotor(lvs_ctx *ctx, int jmax, int all_m, int m, lvs_basis **out) {
  *out = NULL;
  if (jmax < 0) return lvsi_fail(ctx, LVS_EINVAL, "rotor Jmax must be at least 0, got %d", jmax);
  if (jmax > ROTOR_MAX_J)
    return lvsi_fail(ctx, LVS_ECAP, "rotor Jmax of %d is too large (at most %d)", jmax, ROTOR_MAX_J);
  if (!all_m && (m > jmax || m < -jmax))
    return lvsi_fail(ctx, LVS_EINVAL, "rotor M = %d needs |M| <= Jmax = %d", m, jmax);
  int jmin = all_m ? 0 : abs(m);
  size_t n = all_m ? (size_t)(jmax + 1) * (size_t)(jmax + 1) : (size_t)(jmax - jmin + 1);
  static const char *const names[] = {"J", "M"};
  double par[3] = {jmax, all_m ? 1 : 0, all_m ? 0 : m};
  int st = lvsi_basis_new_kind(ctx, LVS_BASIS_ROTOR, n, 2, names, rotor_op, par, 3, out);
  if (st) return st;
  size_t s = 0;
  for (int J = jmin; J <= jmax; J++)
    for (int M = J; M >= -J; M--) {
      if (!all_m && M != m) continue;
      lvsi_basis_set_label(*out, s, 0, J);
      lvsi_basis_set_label(*out, s, 1, M);
      s++;
    }
  return LVS_OK;
}

static long double lfact(int k) { return lgammal((long double)k + 1.0L); }

/* argument checks shared by CG and 3j: j >= 0, |m| <= j, j + m integer */
static int check_jm(lvs_ctx *ctx, int tj, int tm, const char *jn, const char *mn) {
  if (tj < 0) return lvsi_fail(ctx, LVS_EINVAL, "%s must be non-negative, got %g", jn, tj / 2.0);
  if (tj > CG_MAX_TWOJ) return lvsi_fail(ctx, LVS_ERANGE, "%s = %g is above %d", jn, tj / 2.0, CG_MAX_TWOJ / 2);
  if (tm > tj || tm < -tj)
    return lvsi_fail(ctx, LVS_EINVAL, "|%s| must not exceed %s: %s = %g, %s = %g", mn, jn, mn, tm / 2.0, jn,
                     tj / 2.0);
  if ((tj + tm) % 2 != 0)
    return lvsi_fail(ctx, LVS_EINVAL, "%s + %s must be an integer: %s = %g, %s = %g", jn, mn, jn, tj / 2.0, mn,
                     tm / 2.0);
  return LVS_OK;
}

int lvs_clebsch_gordan(lvs_ctx *ctx, int tj1, int tm1, int tj2, int tm2, int tJ, int tM, double *out) {
  int st;
  *out = 0.0;
  if ((st = check_jm(ctx, tj1, tm1, "j1", "m1")) || (st = check_jm(ctx, tj2, tm2, "j2", "m2")) ||
      (st = check_jm(ctx, tJ, tM, "J", "M")))
    return st;
  if (tM != tm1 + tm2) return LVS_OK;
  if (tJ > tj1 + tj2 || tJ < abs(tj1 - tj2) || (tj1 + tj2 + tJ) % 2 != 0) return LVS_OK;
  /* integers from here on */
  int a = (tJ + tj1 - tj2) / 2, bb = (tJ - tj1 + tj2) / 2, c = (tj1 + tj2 - tJ) / 2;
  int s = (tj1 + tj2 + tJ) / 2 + 1;
  int j1mm1 = (tj1 - tm1) / 2, j1pm1 = (tj1 + tm1) / 2, j2mm2 = (tj2 - tm2) / 2, j2pm2 = (tj2 + tm2) / 2;
  int JpM = (tJ + tM) / 2, JmM = (tJ - tM) / 2;
  int d1 = (tJ - tj2 + tm1) / 2, d2 = (tJ - tj1 - tm2) / 2; /* may be negative */
  long double lpre = 0.5L * (logl((long double)tJ + 1.0L) + lfact(a) + lfact(bb) + lfact(c) - lfact(s) +
                              lfact(JpM) + lfact(JmM) + lfact(j1mm1) + lfact(j1pm1) + lfact(j2mm2) +
                              lfact(j2pm2));
  int kmin = 0, kmax = c;
  if (-d1 > kmin) kmin = -d1;
  if (-d2 > kmin) kmin = -d2;
  if (j1mm1 < kmax) kmax = j1mm1;
  if (j2pm2 < kmax) kmax = j2pm2;
  long double sum = 0.0L;
  for (int k = kmin; k <= kmax; k++) {
    long double ld = lfact(k) + lfact(c - k) + lfact(j1mm1 - k) + lfact(j2pm2 - k) + lfact(d1 + k) + lfact(d2 + k);
    long double term = expl(lpre - ld);
    sum += (k % 2) ? -term : term;
  }
  *out = (double)sum;
  return LVS_OK;
}

int lvs_wigner_3j(lvs_ctx *ctx, int tj1, int tj2, int tj3, int tm1, int tm2, int tm3, double *out) {
  double cg;
  int st = lvs_clebsch_gordan(ctx, tj1, tm1, tj2, tm2, tj3, -tm3, &cg);
  *out = 0.0;
  if (st) return st;
  /* (j1 j2 j3; m1 m2 m3) = (-1)^(j1-j2-m3) <j1 m1 j2 m2|j3 -m3>/sqrt(2 j3 + 1)
   * (Edmonds 1957, eq. 3.7.3); j1 - j2 - m3 is an integer when cg != 0 */
  if (cg == 0.0) return LVS_OK;
  int ph = (tj1 - tj2 - tm3) / 2;
  *out = ((ph % 2) ? -cg : cg) / sqrt(tj3 + 1.0);
  return LVS_OK;
}

/* <J+1 M|cos theta|J M> from CG coefficients (integers J, M, |M| <= J) */
static int cos_up(lvs_ctx *ctx, int J, int M, double *v) {
  double c0, cm;
  int st = lvs_clebsch_gordan(ctx, 2 * J, 0, 2, 0, 2 * J + 2, 0, &c0);
  if (!st) st = lvs_clebsch_gordan(ctx, 2 * J, 2 * M, 2, 0, 2 * J + 2, 2 * M, &cm);
  *v = sqrt((2.0 * J + 1.0) / (2.0 * J + 3.0)) * c0 * cm;
  return st;
}

/* <J' M|cos^2 theta|J M> (integers, |M| <= J, J') */
static int cos2_el(lvs_ctx *ctx, int Jp, int J, int M, double *v) {
  double c0, cm;
  int st = lvs_clebsch_gordan(ctx, 2 * J, 0, 4, 0, 2 * Jp, 0, &c0);
  if (!st) st = lvs_clebsch_gordan(ctx, 2 * J, 2 * M, 4, 0, 2 * Jp, 2 * M, &cm);
  *v = (2.0 / 3.0) * sqrt((2.0 * J + 1.0) / (2.0 * Jp + 1.0)) * c0 * cm + (Jp == J ? 1.0 / 3.0 : 0.0);
  return st;
}

static int rotor_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  const double *p = lvsi_basis_par(b);
  int all_m = p[P_ALLM] != 0.0;
  size_t n = lvs_basis_dim(b);
  int which = !strcmp(name, "J2") ? 0 : !strcmp(name, "Jz") ? 1 : !strcmp(name, "cos") ? 2
            : !strcmp(name, "Jp") ? 3 : !strcmp(name, "Jm") ? 4 : !strcmp(name, "Jx") ? 5
            : !strcmp(name, "Jy") ? 6 : !strcmp(name, "cos2") ? 7 : -1;
  *out = NULL;
  if (which < 0 || (!all_m && which >= 3 && which <= 6))
    return lvsi_fail(ctx, LVS_EINVAL, "rotor%s has no operator '%s' (it has J2, Jz, cos, cos2, %sidentity)",
                     all_m ? "" : " with fixed M", name, all_m ? "Jp, Jm, Jx, Jy, " : "");
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, n, n, which == 6, 1, 3 * n + 1, &c);
  if (st) return st;
  long bw = 0;
  for (size_t j = 0; j < n && !st; j++) {
    int J = (int)lvs_basis_label(b, j, 0), M = (int)lvs_basis_label(b, j, 1);
    c->cp[j] = c->nnz;
    switch (which) {
      case 0: if (J > 0) st = lvsi_csc_push(c, j, (double)J * (J + 1)); break;
      case 1: if (M != 0) st = lvsi_csc_push(c, j, (double)M); break;
      case 2: {
        /* column |J M>: rows |J-1 M> (earlier) and |J+1 M> (later) */
        size_t up, dn;
        if (all_m) {
          dn = (size_t)((J - 1) * (J - 1) + (J - 1 - M));
          up = (size_t)((J + 1) * (J + 1) + (J + 1 - M));
        } else {
          dn = j - 1;
          up = j + 1;
        }
        double v;
        if (J - 1 >= abs(M)) {
          if (!(st = cos_up(ctx, J - 1, M, &v))) st = lvsi_csc_push(c, dn, v);
          if ((long)(j - dn) > bw) bw = (long)(j - dn);
        }
        if (!st && up < n) {
          if (!(st = cos_up(ctx, J, M, &v))) st = lvsi_csc_push(c, up, v);
          if ((long)(up - j) > bw) bw = (long)(up - j);
        }
        break;
      }
      case 7: {
        /* rows |J-2 M>, |J M>, |J+2 M> in ascending index */
        int Jmax = (int)p[P_JMAX];
        for (int Jp = J - 2; Jp <= J + 2 && !st; Jp += 2) {
          if (Jp < abs(M) || Jp > Jmax) continue;
          size_t row = all_m ? (size_t)(Jp * Jp + (Jp - M)) : (size_t)((long)j + (Jp - J));
          double v;
          if (!(st = cos2_el(ctx, Jp, J, M, &v)) && v != 0.0) st = lvsi_csc_push(c, row, v);
          long d = (long)row - (long)j;
          if (d < 0) d = -d;
          if (d > bw) bw = d;
        }
        break;
      }
      default: {
        /* states of one J are consecutive with M descending: |J M+1> is row j-1 */
        double cp = M < J ? sqrt((double)J * (J + 1) - (double)M * (M + 1)) : 0.0;
        double cm = M > -J ? sqrt((double)J * (J + 1) - (double)M * (M - 1)) : 0.0;
        bw = 1;
        if (which == 3 && cp != 0.0) st = lvsi_csc_push(c, j - 1, cp);
        if (which == 4 && cm != 0.0) st = lvsi_csc_push(c, j + 1, cm);
        if (which == 5) {
          if (cp != 0.0) st = lvsi_csc_push(c, j - 1, cp / 2);
          if (!st && cm != 0.0) st = lvsi_csc_push(c, j + 1, cm / 2);
        }
        if (which == 6) { /* Jy = (Jp - Jm)/2i */
          if (cp != 0.0) st = lvsi_csc_push(c, j - 1, cp / (2.0 * I));
          if (!st && cm != 0.0) st = lvsi_csc_push(c, j + 1, -cm / (2.0 * I));
        }
      }
    }
  }
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  c->cp[n] = c->nnz;
  *band = bw;
  *out = c;
  return LVS_OK;
}

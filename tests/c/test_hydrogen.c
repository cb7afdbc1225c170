/* test_hydrogen.c -- the Coulomb-Sturmian hydrogen basis (hydrogen.c) and
 * custom bases (basis.c) without Lua: exact levels, radial expectation
 * values, dipole elements, the polarizability sum over the pseudostates,
 * and every error path. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double at(const lvs_matrix *m, size_t i, size_t j) {
  double re, im;
  lvs_matrix_get(m, i, j, &re, &im);
  return re;
}

static size_t find(const lvs_basis *b, int n, int l, int m) {
  for (size_t s = 0; s < lvs_basis_dim(b); s++)
    if (lvs_basis_label(b, s, 0) == n && lvs_basis_label(b, s, 1) == l && lvs_basis_label(b, s, 2) == m)
      return s;
  return (size_t)-1;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  lvs_basis *b = NULL;
  lvs_coulomb_spec sp = {.lmax = 2, .nfun = 24, .kappa = 0.5, .Z = 1.0, .m = 0, .all_m = 0};
  CHECK(lvs_coulomb_basis(ctx, &sp, &b) == LVS_OK, "build: %s", lvs_errmsg(ctx));
  CHECK(lvs_basis_dim(b) == 72, "dim %zu", lvs_basis_dim(b));
  CHECK(lvs_basis_kind_of(b) == LVS_BASIS_CUSTOM, "kind");
  CHECK(!strcmp(lvs_basis_label_name(b, 0), "n") && !strcmp(lvs_basis_label_name(b, 2), "m"), "label names");
  lvs_matrix *H0, *z, *r, *r2, *L2;
  CHECK(lvs_basis_op(b, 0, "H0", &H0) == LVS_OK, "H0");
  CHECK(lvs_basis_op(b, 0, "z", &z) == LVS_OK, "z");
  CHECK(lvs_basis_op(b, 0, "r", &r) == LVS_OK, "r");
  CHECK(lvs_basis_op(b, 0, "r2", &r2) == LVS_OK, "r2");
  CHECK(lvs_basis_op(b, 0, "L2", &L2) == LVS_OK, "L2");
  size_t s1 = find(b, 1, 0, 0), s2 = find(b, 2, 0, 0), p2 = find(b, 2, 1, 0);
  CHECK(s1 == 0 && s2 == 1 && p2 == 2, "order 1s 2s 2p: %zu %zu %zu", s1, s2, p2);
  /* source: Bohr levels E_n = -1/(2 n^2) (Bethe & Salpeter, Quantum
   * Mechanics of One- and Two-Electron Atoms, 1957, eq. 2.12); n = 2 lies in
   * the space (kappa = 1/2), 1s converges geometrically */
  CHECK(fabs(at(H0, s2, s2) + 0.125) < 1e-14, "2s %.17g", at(H0, s2, s2));
  CHECK(fabs(at(H0, p2, p2) + 0.125) < 1e-14, "2p %.17g", at(H0, p2, p2));
  CHECK(fabs(at(H0, s1, s1) + 0.5) < 1e-12, "1s %.17g", at(H0, s1, s1));
  CHECK(at(H0, s1, s1) >= -0.5 - 1e-15, "1s is an upper bound");
  /* source: <r> = (3n^2 - l(l+1))/2, <r^2> = n^2 (5n^2 + 1 - 3l(l+1))/2
   * (Bethe & Salpeter 1957, eq. 3.24) */
  CHECK(fabs(at(r, s1, s1) - 1.5) < 1e-10, "<1s|r|1s> %.15g", at(r, s1, s1));
  CHECK(fabs(at(r, s2, s2) - 6.0) < 1e-12, "<2s|r|2s> %.15g", at(r, s2, s2));
  CHECK(fabs(at(r, p2, p2) - 5.0) < 1e-12, "<2p|r|2p> %.15g", at(r, p2, p2));
  CHECK(fabs(at(r2, s2, s2) - 42.0) < 1e-11, "<2s|r2|2s> %.15g", at(r2, s2, s2));
  CHECK(fabs(at(r2, p2, p2) - 30.0) < 1e-11, "<2p|r2|2p> %.15g", at(r2, p2, p2));
  CHECK(fabs(at(r2, s1, s1) - 3.0) < 1e-9, "<1s|r2|1s> %.15g", at(r2, s1, s1));
  CHECK(at(L2, p2, p2) == 2.0 && at(L2, s2, s2) == 0.0, "L2");
  /* source: radial integrals <1s|r|2p> = 2^7 sqrt(6)/3^5, <2s|r|2p> =
   * -3 sqrt(3) (Bethe & Salpeter 1957, table 13), times <1|cos|0> = 1/sqrt 3;
   * radial functions positive near r = 0 */
  CHECK(fabs(at(z, s1, p2) - 128.0 * sqrt(2.0) / 243.0) < 1e-10, "<1s|z|2p0> %.15g", at(z, s1, p2));
  CHECK(fabs(at(z, s2, p2) + 3.0) < 1e-12, "<2s|z|2p0> %.15g", at(z, s2, p2));
  CHECK(at(z, s1, s2) == 0.0 && at(z, s1, s1) == 0.0, "z connects l to l +- 1 only");
  /* static polarizability alpha = 2 sum_k |<1s|z|k>|^2 / (E_k - E_1s) = 9/2
   * (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955)); the pseudostates
   * carry the continuum part (the bound-only sum is about 3.66) */
  double alpha = 0.0, e1 = at(H0, s1, s1);
  for (size_t k = 0; k < lvs_basis_dim(b); k++)
    if (k != s1) alpha += 2.0 * at(z, s1, k) * at(z, s1, k) / (at(H0, k, k) - e1);
  CHECK(fabs(alpha - 4.5) < 1e-8, "alpha %.15g", alpha);
  lvs_matrix_free(H0);
  lvs_matrix_free(z);
  lvs_matrix_free(r);
  lvs_matrix_free(r2);
  lvs_matrix_free(L2);
  lvs_basis_free(b);

  /* every m: n = 2 holds 2s, 2p(-1, 0, +1) at -1/8; Lz labels */
  sp.all_m = 1;
  sp.lmax = 1;
  sp.nfun = 6;
  CHECK(lvs_coulomb_basis(ctx, &sp, &b) == LVS_OK, "all m: %s", lvs_errmsg(ctx));
  CHECK(lvs_basis_dim(b) == 24, "dim %zu", lvs_basis_dim(b));
  lvs_matrix *Lz;
  lvs_basis_op(b, 0, "z", &z);
  lvs_basis_op(b, 0, "Lz", &Lz);
  size_t pm = find(b, 2, 1, -1), pp = find(b, 2, 1, 1);
  CHECK(pm == 2 && pp == 4, "2p order %zu %zu", pm, pp);
  CHECK(at(Lz, pm, pm) == -1.0 && at(Lz, pp, pp) == 1.0, "Lz");
  CHECK(at(z, find(b, 2, 0, 0), pm) == 0.0, "z keeps m");
  lvs_matrix_free(z);
  lvs_matrix_free(Lz);
  CHECK(lvs_basis_op(b, 0, "w", &z) == LVS_EINVAL && z == NULL, "unknown op");
  CHECK(strstr(lvs_errmsg(ctx), "no operator 'w'") != NULL, "msg: %s", lvs_errmsg(ctx));
  /* a product with a custom factor embeds its operators per site */
  lvs_basis *sp2, *prod;
  lvs_basis_spin(ctx, 1, &sp2);
  const lvs_basis *f[2] = {b, sp2};
  CHECK(lvs_basis_product(ctx, f, 2, &prod) == LVS_OK, "product: %s", lvs_errmsg(ctx));
  CHECK(lvs_basis_op(prod, 1, "H0", &H0) == LVS_OK, "site H0: %s", lvs_errmsg(ctx));
  CHECK(fabs(at(H0, 3, 3) + 0.125) < 1e-14, "product H0 (2s, down) %.17g", at(H0, 3, 3));
  lvs_matrix_free(H0);
  lvs_basis_free(prod);
  lvs_basis_free(sp2);
  lvs_basis_free(b);

  /* x, y with every m: rotational invariance, H0 + F x, H0 + F y and
   * H0 + F z have one spectrum (source: common practice, the space is
   * closed under rotations); [Lz, x] = i y (common practice) */
  sp.all_m = 1;
  sp.lmax = 3;
  sp.nfun = 5;
  CHECK(lvs_coulomb_basis(ctx, &sp, &b) == LVS_OK, "x/y basis: %s", lvs_errmsg(ctx));
  {
    lvs_matrix *h0, *ops[3], *hs[3];
    const char *nm3[3] = {"x", "y", "z"};
    size_t n = lvs_basis_dim(b);
    double one[2] = {1, 0}, f[2] = {0.0137, 0};
    lvs_basis_op(b, 0, "H0", &h0);
    double ev[3][80];
    for (int k = 0; k < 3; k++) {
      CHECK(lvs_basis_op(b, 0, nm3[k], &ops[k]) == LVS_OK, "op %s", nm3[k]);
      lvs_matrix_add(one, h0, f, ops[k], &hs[k]);
      CHECK(lvs_eigen(hs[k], 0, 0, ev[k], NULL) == LVS_OK, "eigen %s: %s", nm3[k], lvs_errmsg(ctx));
    }
    CHECK(n == 80, "dim %zu", n);
    double worst = 0;
    for (size_t i = 0; i < n; i++)
      for (int k = 0; k < 2; k++) worst = fmax(worst, fabs(ev[k][i] - ev[2][i]));
    CHECK(worst < 1e-12, "spectra of H0 + F x, y, z differ by %.3g", worst);
    CHECK(lvs_matrix_is_complex(ops[1]) && !lvs_matrix_is_complex(ops[0]), "y complex, x real");
    lvs_matrix *lz;
    lvs_basis_op(b, 0, "Lz", &lz);
    double cw = 0;
    for (size_t i = 0; i < n; i++)
      for (size_t j = 0; j < n; j++) {
        double xr, xi, yr, yi;
        lvs_matrix_get(ops[0], i, j, &xr, &xi);
        lvs_matrix_get(ops[1], i, j, &yr, &yi);
        double dm = at(lz, i, i) - at(lz, j, j); /* [Lz, x]_ij = dm x_ij = i y_ij */
        cw = fmax(cw, fabs(dm * xr + yi) + fabs(dm * xi - yr));
      }
    CHECK(cw < 1e-14, "[Lz, x] - i y = %.3g", cw);
    /* the angular factor: <2p, m=1|x|1s> = -<1s|r|2p>/sqrt(6) (Condon-Shortley) */
    size_t s1b = find(b, 1, 0, 0), p1 = find(b, 2, 1, 1);
    CHECK(fabs(at(ops[0], p1, s1b) + at(ops[2], find(b, 2, 1, 0), s1b) / sqrt(2.0)) < 1e-12,
          "<2p1|x|1s> = -<2p0|z|1s>/sqrt2: %.15g", at(ops[0], p1, s1b));
    for (int k = 0; k < 3; k++) {
      lvs_matrix_free(ops[k]);
      lvs_matrix_free(hs[k]);
    }
    lvs_matrix_free(h0);
    lvs_matrix_free(lz);
  }
  lvs_basis_free(b);
  sp.all_m = 0;
  CHECK(lvs_coulomb_basis(ctx, &sp, &b) == LVS_OK, "fixed m");
  CHECK(lvs_basis_op(b, 0, "x", &z) == LVS_EINVAL, "no x with one m");
  lvs_basis_free(b);

  /* errors */
  lvs_coulomb_spec bad = {.lmax = -1, .nfun = 4, .kappa = 0.5, .Z = 1.0};
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL && b == NULL, "lmax < 0");
  CHECK(strstr(lvs_errmsg(ctx), "lmax") != NULL, "msg: %s", lvs_errmsg(ctx));
  bad.lmax = 1;
  bad.nfun = 0;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL, "nfun 0");
  bad.nfun = 4;
  bad.kappa = 0.0;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL, "kappa 0");
  bad.kappa = NAN;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL, "kappa NaN");
  bad.kappa = 1e300;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL && b == NULL, "kappa overflow");
  CHECK(strstr(lvs_errmsg(ctx), "overflows") != NULL, "msg: %s", lvs_errmsg(ctx));
  bad.kappa = 1e-300;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL && b == NULL, "kappa underflow");
  CHECK(strstr(lvs_errmsg(ctx), "overflows") != NULL, "msg: %s", lvs_errmsg(ctx));
  bad.kappa = 0.5;
  bad.Z = -1.0;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL, "Z < 0");
  bad.Z = 1.0;
  bad.m = 2;
  CHECK(lvs_coulomb_basis(ctx, &bad, &b) == LVS_EINVAL, "|m| > lmax");
  CHECK(strstr(lvs_errmsg(ctx), "exceeds lmax") != NULL, "msg: %s", lvs_errmsg(ctx));
  CHECK(lvs_coulomb_basis(ctx, NULL, &b) == LVS_EINVAL, "NULL spec");
  const char *nm[1] = {"toolongnamefor16chars"};
  double lab[2] = {0, 1};
  CHECK(lvs_basis_custom(ctx, 2, 1, nm, lab, &b) == LVS_EINVAL, "long label name");
  nm[0] = "q";
  CHECK(lvs_basis_custom(ctx, 2, 1, nm, lab, &b) == LVS_OK, "custom");
  lvs_matrix *w;
  lvs_matrix_new(ctx, 3, 3, 0, &w);
  CHECK(lvs_basis_custom_op(b, "w", w) == LVS_EDIM, "op size");
  lvs_matrix_free(w);
  lvs_basis_free(b);
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failures\n", failures);
  return failures ? 1 : 0;
}

/* test_units.c -- the CODATA 2018 table and unit conversion (units.c)
 * without Lua. Reference numbers are typed from the published table:
 * Tiesinga, Mohr, Newell, Taylor, "CODATA recommended values of the
 * fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010 (2021). */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static double rel(double want, double got) { return fabs(got - want) / fabs(want); }

static double val(const char *name) {
  const lvs_constant *c = lvs_constant_find(name);
  if (!c) {
    failures++;
    fprintf(stderr, "FAIL: constant %s missing\n", name);
    return NAN;
  }
  return c->value;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  /* exact SI values and table entries (CODATA 2018) */
  CHECK(val("c") == 299792458.0, "c");
  CHECK(val("h") == 6.62607015e-34, "h");
  CHECK(val("e") == 1.602176634e-19, "e");
  CHECK(val("k_B") == 1.380649e-23, "k_B");
  CHECK(lvs_constant_find("h")->uncertainty == 0, "h exact");
  CHECK(val("mu_B") == 9.2740100783e-24, "mu_B");
  CHECK(val("E_h") == 4.3597447222071e-18, "E_h");
  CHECK(val("alpha") == 7.2973525693e-3, "alpha");
  CHECK(val("m_e") == 9.1093837015e-31, "m_e");
  CHECK(val("a0") == 5.29177210903e-11, "a0");
  CHECK(val("g_e") == -2.00231930436256, "g_e");
  CHECK(fabs(lvs_constant_find("alpha")->uncertainty - 0.0000000011e-3) < 1e-20, "alpha uncertainty");
  CHECK(strcmp(lvs_constant_find("mu_B")->unit, "J T^-1") == 0, "mu_B unit");
  /* E_h = alpha^2 m_e c^2 (definition; agreement limited by the table's rounding) */
  CHECK(rel(val("E_h"), pow(val("alpha"), 2) * val("m_e") * pow(val("c"), 2)) < 1e-9, "E_h = alpha^2 m_e c^2");
  /* every entry has a name, unit string and description */
  size_t n = 0;
  for (const lvs_constant *c; (c = lvs_constant_at(n)) != NULL; n++)
    CHECK(c->name && c->unit && c->about && c->uncertainty >= 0, "entry %zu", n);
  CHECK(n > 30, "table size %zu", n);
  CHECK(lvs_constant_find("nonesuch") == NULL && lvs_constant_find(NULL) == NULL, "unknown constant");

  /* conversions against the energy-equivalence entries (CODATA 2018) */
  double x = 0;
  CHECK(lvs_unit_convert(ctx, 1, "hartree", "eV", &x) == LVS_OK && rel(27.211386245988, x) < 1e-12, "Eh->eV %.17g", x);
  CHECK(lvs_unit_convert(ctx, 1, "hartree", "cm^-1", &x) == LVS_OK && rel(219474.63136320, x) < 1e-12, "Eh->cm-1");
  CHECK(lvs_unit_convert(ctx, 1, "eV", "K", &x) == LVS_OK && rel(1.160451812e4, x) < 1e-9, "eV->K");
  CHECK(lvs_unit_convert(ctx, 1, "T", "GHz", &x) == LVS_OK && rel(13.9962449361, x) < 1e-11, "T->GHz");
  CHECK(lvs_unit_convert(ctx, 1, "au_field", "V/m", &x) == LVS_OK && x == 5.14220674763e11, "au field");
  CHECK(lvs_unit_convert(ctx, 2.385, "MHz", "MHz", &x) == LVS_OK && x == 2.385, "identity");
  CHECK(strcmp(lvs_unit_kind("kV/cm"), "electric field") == 0, "kind");
  /* debye: 1e-21/c C m by definition; e a0 = 8.4783536255e-30 C m (CODATA 2018,
   * Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)); 1 D = 0.393430269522 e a0 */
  CHECK(strcmp(lvs_unit_kind("D"), "dipole") == 0, "dipole kind");
  CHECK(lvs_unit_convert(ctx, 1, "D", "ea0", &x) == LVS_OK && fabs(x / 0.393430269522 - 1) < 1e-11, "debye in e a0");
  CHECK(lvs_unit_kind("parsec") == NULL && lvs_unit_kind(NULL) == NULL, "unknown kind");
  const char *kind = NULL;
  CHECK(lvs_unit_at(0, &kind) != NULL && kind != NULL, "unit_at");
  CHECK(lvs_unit_at(100000, NULL) == NULL, "unit_at past the end");

  /* errors: code and message, *out untouched */
  x = 7;
  CHECK(lvs_unit_convert(ctx, 1, "Ghz", "K", &x) == LVS_EINVAL && x == 7, "unknown from");
  CHECK(strcmp(lvs_errmsg(ctx), "unknown unit 'Ghz'") == 0, "msg: %s", lvs_errmsg(ctx));
  CHECK(lvs_unit_convert(ctx, 1, "V/m", "GHz", &x) == LVS_EINVAL && x == 7, "kinds");
  CHECK(strcmp(lvs_errmsg(ctx), "cannot convert electric field 'V/m' to energy 'GHz'") == 0, "msg: %s", lvs_errmsg(ctx));
  CHECK(lvs_unit_convert(ctx, 1, "eV", NULL, &x) == LVS_EINVAL, "NULL unit");
  CHECK(lvs_unit_convert(ctx, 1, "eV", "K", NULL) == LVS_EINVAL, "NULL out");

  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  else printf("test_units: all passed\n");
  return failures ? 1 : 0;
}

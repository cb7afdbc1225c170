/* golden.c -- Fermi's golden rule (hbar = 1).
 *
 * Rate from a level i into a band (Dirac, Proc. R. Soc. A 114, 243 (1927);
 * Fermi, Nuclear Physics (1950); Sakurai, Modern Quantum Mechanics, rev. ed.
 * (1994), Sec. 5.6):
 *   constant V:                   Gamma = 2 pi |V_fi|^2 rho(E_i)
 *   V(t) = F e^{-iwt} + F^+ e^{iwt}:
 *     absorption                  Gamma = 2 pi |F_fi|^2 rho(E_i + w)
 *     emission                    Gamma = 2 pi |F^+_fi|^2 rho(E_i - w)
 * (V0 cos wt has F = V0/2.) The density of states is a number, a callback
 * rho(E), or a discretised band of levels E_k, each broadened by a
 * normalised Lorentzian (half width g) or Gaussian (standard deviation g):
 *   Gamma = 2 pi sum_k |V_k|^2 L_g(E_f - E_k).
 * The rule needs Gamma small against the band width and, for a discretised
 * band, a broadening above the level spacing; both are checked and reported
 * as warnings, not errors.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

static double shape_at(int shape, double x, double g) {
  if (shape == LVS_BAND_GAUSSIAN) return exp(-0.5 * (x / g) * (x / g)) / (g * sqrt(2 * M_PI));
  return (g / M_PI) / (x * x + g * g);
}

static void addwarn(lvs_golden_result *r, const char *msg) {
  size_t len = strlen(r->warning);
  snprintf(r->warning + len, sizeof r->warning - len, "%s%s", len ? "; " : "", msg);
}

int lvs_golden_rate(lvs_ctx *ctx, const lvs_golden_spec *sp, lvs_golden_result *out) {
  memset(out, 0, sizeof *out);
  int nsrc = (sp->has_rho != 0) + (sp->dos_fn != NULL) + (sp->band != NULL);
  if (nsrc != 1)
    return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: give exactly one density of states (a number, a function or a band)");
  if (sp->process != LVS_GOLDEN_CONSTANT && sp->process != LVS_GOLDEN_ABSORPTION && sp->process != LVS_GOLDEN_EMISSION)
    return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: unknown process %d", sp->process);
  if (!isfinite(sp->energy)) return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the initial energy must be finite");
  if (!sp->band_coupling && !isfinite(sp->coupling))
    return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the coupling must be a finite number");
  double Ef = sp->energy;
  if (sp->process != LVS_GOLDEN_CONSTANT) {
    if (!(sp->omega > 0) || !isfinite(sp->omega))
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: omega must be a finite number > 0, got %g", sp->omega);
    Ef += sp->process == LVS_GOLDEN_ABSORPTION ? sp->omega : -sp->omega;
  }
  out->final_energy = Ef;
  double v2 = sp->coupling * sp->coupling, rho = 0, sum = 0;
  if (sp->has_rho) {
    if (!(sp->rho >= 0) || !isfinite(sp->rho))
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the density of states must be a finite number >= 0, got %g", sp->rho);
    rho = sp->rho;
    sum = v2 * rho;
  } else if (sp->dos_fn) {
    if (sp->dos_fn(sp->ud, Ef, &rho))
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the density-of-states function failed at E = %.17g", Ef);
    if (!(rho >= 0) || !isfinite(rho))
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the density-of-states function returned %g at E = %.17g (finite >= 0 expected)",
                       rho, Ef);
    sum = v2 * rho;
  } else {
    size_t n = sp->nband;
    if (n == 0) return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the band has no levels");
    if (!(sp->broadening > 0) || !isfinite(sp->broadening))
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: the broadening must be a finite number > 0, got %g", sp->broadening);
    if (sp->shape != LVS_BAND_LORENTZIAN && sp->shape != LVS_BAND_GAUSSIAN)
      return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: unknown band shape %d", sp->shape);
    double lo = INFINITY, hi = -INFINITY;
    for (size_t k = 0; k < n; k++) {
      double E = sp->band[k];
      if (!isfinite(E)) return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: band level %zu is not a finite number", k + 1);
      double c = sp->band_coupling ? sp->band_coupling[k] : sp->coupling;
      if (!isfinite(c)) return lvsi_fail(ctx, LVS_EINVAL, "golden_rule: coupling %zu is not a finite number", k + 1);
      double L = shape_at(sp->shape, Ef - E, sp->broadening);
      rho += L;
      sum += c * c * L;
      lo = fmin(lo, E), hi = fmax(hi, E);
    }
    out->spacing = n > 1 ? (hi - lo) / (double)(n - 1) : 0;
    out->bandwidth = hi - lo;
    if (n > 1 && sp->broadening < out->spacing * (1 - 1e-9)) { /* slack for the rounded spacing */
      char msg[160];
      snprintf(msg, sizeof msg, "broadening %.3g is below the mean level spacing %.3g: the band does not act as a continuum",
               sp->broadening, out->spacing);
      addwarn(out, msg);
    }
    if (Ef < lo || Ef > hi) addwarn(out, "the final energy lies outside the band: the rate comes from the broadening tails");
  }
  out->rho = rho;
  out->rate = 2 * M_PI * sum;
  if (out->bandwidth > 0 && out->rate > 0.1 * out->bandwidth) {
    char msg[160];
    snprintf(msg, sizeof msg, "the rate %.3g is not small against the band width %.3g: the golden rule is unreliable",
             out->rate, out->bandwidth);
    addwarn(out, msg);
  }
  if (out->spacing > 0 && sp->band && out->rate * 2 * M_PI / out->spacing < 1) {
    addwarn(out, "the decay time is longer than the recurrence time 2 pi / spacing of the discrete band");
  }
  return LVS_OK;
}

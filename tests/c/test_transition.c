/* test_transition.c -- transitions and the golden rule through the C API
 * only: first order against Rabi's small-coupling limit, exact RK4 to a
 * tolerance, the golden-rule formula and its error paths. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

#include "check.h"

static int dos_linear(void *ud, double E, double *rho) {
  (void)ud;
  *rho = 12.5 + 2.0 * E; /* invented */
  return 0;
}

static int dos_fails(void *ud, double E, double *rho) {
  (void)ud, (void)E, (void)rho;
  return 1;
}

int main(void) {
  lvs_ctx *ctx = lvs_ctx_new(NULL, NULL);
  CHECK(ctx != NULL, "context");

  /* two levels -D/2, D/2 coupled by W/2 from t = 0 to T.
   * source: Rabi, Phys. Rev. 51, 652 (1937): P = W^2/(W^2+D^2) sin^2(sqrt(W^2+D^2) T/2) */
  double D = 1.0, W = 0.8, T = 7.3;
  lvs_matrix *H0, *V;
  CHECK(lvs_matrix_new(ctx, 2, 2, 0, &H0) == LVS_OK && lvs_matrix_new(ctx, 2, 2, 0, &V) == LVS_OK, "matrices");
  lvs_matrix_set(H0, 0, 0, -D / 2, 0);
  lvs_matrix_set(H0, 1, 1, D / 2, 0);
  lvs_matrix_set(V, 0, 1, W / 2, 0);
  lvs_matrix_set(V, 1, 0, W / 2, 0);
  lvs_pulse *sq;
  CHECK(lvs_pulse_square(ctx, 1.0, 0.0, T, &sq) == LVS_OK, "square pulse");
  lvs_transition_spec sp;
  memset(&sp, 0, sizeof sp);
  sp.h0 = H0, sp.v = V, sp.pulse = sq, sp.from = 0, sp.t0 = 0, sp.t1 = T, sp.order = 1, sp.steps = 400;
  lvs_transition *tr = NULL, *ex = NULL;
  CHECK(lvs_transition_new(ctx, &sp, &tr) == LVS_OK, "transition: %s", lvs_errmsg(ctx));
  if (tr) {
    double re, im;
    /* first order: |V|^2 sin^2(w T/2)/(w/2)^2 (METHODS.md section 6, constant V from t = 0) */
    CHECK(lvs_transition_amplitude(tr, 1, 1, &re, &im) == LVS_OK, "amplitude");
    double p1 = re * re + im * im, want1 = (W / 2) * (W / 2) * pow(sin(D * T / 2), 2) / pow(D / 2, 2);
    CHECK(fabs(p1 - want1) < 1e-12, "first order %.15g vs %.15g", p1, want1);
    lvs_exact_spec es = {LVS_EXACT_RK4, 0, 1e-11, 0};
    lvs_transition_source src = {NULL, NULL, NULL};
    CHECK(lvs_transition_exact(tr, &src, &es, &ex) == LVS_OK, "exact: %s", lvs_errmsg(ctx));
    if (ex) {
      CHECK(lvs_transition_amplitude(ex, 1, -1, &re, &im) == LVS_OK, "exact amplitude");
      double R2 = W * W + D * D, want = W * W / R2 * pow(sin(sqrt(R2) * T / 2), 2);
      CHECK(fabs(re * re + im * im - want) < 1e-10, "exact %.15g vs Rabi %.15g", re * re + im * im, want);
      CHECK(lvs_transition_order(ex) == 0 && lvs_transition_steps(ex) > 16, "exact result");
    }
    /* errors: level out of range; unknown method; negative tol */
    CHECK(lvs_transition_amplitude(tr, 2, 1, &re, &im) == LVS_ERANGE, "range");
    lvs_transition *bad = NULL;
    lvs_exact_spec e2 = {7, 0, 0, 0};
    CHECK(lvs_transition_exact(tr, &src, &e2, &bad) == LVS_EINVAL && bad == NULL, "method");
    lvs_exact_spec e3 = {LVS_EXACT_AUTO, 0, -1, 0};
    CHECK(lvs_transition_exact(tr, &src, &e3, &bad) == LVS_EINVAL && bad == NULL, "tol");
    /* a tolerance out of reach: LVS_ENOCONV */
    lvs_exact_spec e4 = {LVS_EXACT_AUTO, 0, 1e-15, 64};
    CHECK(lvs_transition_exact(tr, &src, &e4, &bad) == LVS_ENOCONV && bad == NULL, "no convergence");
    CHECK(strstr(lvs_errmsg(ctx), "no convergence") != NULL, "message: %s", lvs_errmsg(ctx));
  }
  /* t1 before t0, from out of range */
  lvs_transition *bad = NULL;
  sp.t1 = -1;
  CHECK(lvs_transition_new(ctx, &sp, &bad) == LVS_EINVAL && bad == NULL, "t1 before t0");
  CHECK(strstr(lvs_errmsg(ctx), "must exceed t0") != NULL, "message: %s", lvs_errmsg(ctx));
  sp.t1 = T, sp.from = 2;
  CHECK(lvs_transition_new(ctx, &sp, &bad) == LVS_ERANGE && bad == NULL, "from out of range");

  /* golden rule. source: Dirac, Proc. R. Soc. A 114, 243 (1927); Sakurai,
   * Modern Quantum Mechanics, rev. ed. (1994), Sec. 5.6: Gamma = 2 pi |V|^2 rho */
  lvs_golden_spec g;
  lvs_golden_result r;
  memset(&g, 0, sizeof g);
  g.coupling = 0.0137, g.has_rho = 1, g.rho = 42.5;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_OK, "golden: %s", lvs_errmsg(ctx));
  CHECK(fabs(r.rate - 2 * M_PI * 0.0137 * 0.0137 * 42.5) < 1e-15, "rate %.17g", r.rate);
  memset(&g, 0, sizeof g);
  g.coupling = 0.021, g.energy = 0.35, g.omega = 1.7, g.process = LVS_GOLDEN_EMISSION, g.dos_fn = dos_linear;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_OK, "golden emission");
  CHECK(fabs(r.final_energy - (0.35 - 1.7)) < 1e-15, "final energy %g", r.final_energy);
  CHECK(fabs(r.rate - 2 * M_PI * 0.021 * 0.021 * (12.5 + 2.0 * (0.35 - 1.7))) < 1e-15, "emission rate %.17g", r.rate);
  g.dos_fn = dos_fails;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_EINVAL, "failing density of states");
  g.dos_fn = dos_linear, g.omega = -1;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_EINVAL, "negative omega");
  g.omega = 1, g.has_rho = 1;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_EINVAL, "two densities of states");
  memset(&g, 0, sizeof g);
  double band[3] = {-0.1, 0.0, 0.1};
  g.coupling = 0.01, g.band = band, g.nband = 3, g.broadening = 0;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_EINVAL, "zero broadening");
  g.broadening = 0.1, g.shape = LVS_BAND_LORENTZIAN;
  CHECK(lvs_golden_rate(ctx, &g, &r) == LVS_OK, "band: %s", lvs_errmsg(ctx));
  /* Gamma = 2 pi 1e-4 (2/(0.1 pi)) = 4e-3 decays slower than 2 pi / 0.1 recurs */
  CHECK(strstr(r.warning, "recurrence time") != NULL, "band warning: %s", r.warning);
  /* three unit Lorentzians of half width g at -g, 0, g, seen from 0:
   * (1/(pi g)) (1 + 2 * 1/2) (common practice) */
  CHECK(fabs(r.rho - 2 / (M_PI * 0.1)) < 1e-12, "band rho %.17g", r.rho);

  /* a fast carrier under a Gaussian at the default grid (steps = 0): levels 0
   * and w0 = 250 coupled by g, pulse exp(-t^2/(2 s^2)) cos(w0 t), w0 s = 1000.
   * source: first order (Sakurai, Modern Quantum Mechanics, Sec. 5.6) with the
   * Fourier transform of a Gaussian (Abramowitz & Stegun 7.4.6):
   * |a| = (g/2) s sqrt(2 pi) (1 + e^{-2 w0^2 s^2}) */
  {
    double w0 = 250.0, g = 1e-3, s = 4.0;
    lvs_matrix *H2, *V2;
    lvs_pulse *env = NULL, *car = NULL;
    CHECK(lvs_matrix_new(ctx, 2, 2, 0, &H2) == LVS_OK && lvs_matrix_new(ctx, 2, 2, 0, &V2) == LVS_OK, "matrices");
    lvs_matrix_set(H2, 1, 1, w0, 0);
    lvs_matrix_set(V2, 0, 1, g, 0);
    lvs_matrix_set(V2, 1, 0, g, 0);
    CHECK(lvs_pulse_gaussian(ctx, 1.0, 0.0, s, &env) == LVS_OK, "envelope");
    CHECK(lvs_pulse_sine(ctx, 1.0, w0, M_PI / 2, env, &car) == LVS_OK, "carrier");
    lvs_transition_spec fc;
    memset(&fc, 0, sizeof fc);
    fc.h0 = H2, fc.v = V2, fc.pulse = car, fc.from = 0, fc.t0 = -INFINITY, fc.t1 = INFINITY, fc.order = 1;
    lvs_transition *ft = NULL;
    CHECK(lvs_transition_new(ctx, &fc, &ft) == LVS_OK, "fast carrier: %s", lvs_errmsg(ctx));
    if (ft) {
      double re, im, want = g / 2 * s * sqrt(2 * M_PI);
      CHECK(lvs_transition_amplitude(ft, 1, 1, &re, &im) == LVS_OK, "amplitude");
      CHECK(fabs(hypot(re, im) - want) < 1e-7 * want, "fast carrier |a| %.15g vs %.15g", hypot(re, im), want);
      CHECK(lvs_transition_warnings(ft)[0] == 0, "warnings: %s", lvs_transition_warnings(ft));
    }
    lvs_transition_free(ft);
    lvs_pulse_free(car);
    lvs_pulse_free(env);
    lvs_matrix_free(H2);
    lvs_matrix_free(V2);
  }

  lvs_transition_free(ex);
  lvs_transition_free(tr);
  lvs_pulse_free(sq);
  lvs_matrix_free(H0);
  lvs_matrix_free(V);
  lvs_ctx_free(ctx);
  if (failures) fprintf(stderr, "%d failure(s)\n", failures);
  return failures ? 1 : 0;
}

/* ltransition.c -- ls.pulse.* and ls.transition{...} (hbar = 1).
 *
 *   ls.pulse.gaussian{amplitude=, center=, width=}   .square{amplitude=, start=, stop=}
 *   ls.pulse.sine{amplitude=, omega=, phase=, envelope=}  .ramp{from=, to=, start=, stop=}
 *   pulse + pulse, pulse(t)
 *   ls.transition{H0=, V=, pulse=, from=, t0=, t1=, order=, steps=}
 *     (steps nil: grids chosen from the pulse and refined; see transition.c)
 *     V an op with pulse (a pulse or a Lua function of t), or V a Lua
 *     function of t returning an op (then no pulse).
 *   tr:amplitude(to [, order]) -> re, im; tr:probability(to [, order]);
 *   tr:error(to); tr:exact([steps | {steps=, tol=, method=}]); tr:steps();
 *   tr:warnings(); tr:energies(); tr:dim()
 *   ls.golden_rule{V=, rho= | band=, E=, omega=, process=, broadening=, shape=,
 *                  couplings=} -> rate, info (Fermi's golden rule)
 */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "bind/lbind.h"

#define LVS_PULSE_MT "levelshift.pulse"
#define LVS_TRANSITION_MT "levelshift.transition"

/* ---- pulses ----------------------------------------------------------------- */

static lvs_pulse **newpulse(lua_State *L) {
  lvs_pulse **p = lua_newuserdatauv(L, sizeof *p, 0);
  *p = NULL;
  luaL_setmetatable(L, LVS_PULSE_MT);
  return p;
}

static lvs_pulse *checkpulse(lua_State *L, int idx) {
  lvs_pulse **p = luaL_checkudata(L, idx, LVS_PULSE_MT);
  if (!*p) luaL_argerror(L, idx, "attempt to use a freed pulse");
  return *p;
}

static double needfield(lua_State *L, const char *fname, const char *key, int required, double def) {
  lua_getfield(L, 1, key);
  double v = def;
  if (lua_isnil(L, -1)) {
    if (required) luaL_error(L, "bad argument #1 to '%s' (field '%s' is required)", fname, key);
  } else if (!lua_isnumber(L, -1)) {
    luaL_error(L, "bad argument #1 to '%s' (field '%s' must be a number, got %s)", fname, key, luaL_typename(L, -1));
  } else {
    v = lua_tonumber(L, -1);
  }
  lua_pop(L, 1);
  return v;
}

static int p_gaussian(lua_State *L) {
  static const char *const known[] = {"amplitude", "center", "width", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "pulse.gaussian", 1);
  double a = needfield(L, "pulse.gaussian", "amplitude", 0, 1.0), c = needfield(L, "pulse.gaussian", "center", 0, 0.0),
         w = needfield(L, "pulse.gaussian", "width", 1, 0);
  lvs_pulse **out = newpulse(L);
  lvsL_check(L, lvsL_ctx(L), lvs_pulse_gaussian(lvsL_ctx(L), a, c, w, out), "pulse.gaussian");
  return 1;
}

static int p_square(lua_State *L) {
  static const char *const known[] = {"amplitude", "start", "stop", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "pulse.square", 1);
  double a = needfield(L, "pulse.square", "amplitude", 0, 1.0), s = needfield(L, "pulse.square", "start", 1, 0),
         e = needfield(L, "pulse.square", "stop", 1, 0);
  lvs_pulse **out = newpulse(L);
  lvsL_check(L, lvsL_ctx(L), lvs_pulse_square(lvsL_ctx(L), a, s, e, out), "pulse.square");
  return 1;
}

static int p_sine(lua_State *L) {
  static const char *const known[] = {"amplitude", "omega", "phase", "envelope", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "pulse.sine", 1);
  double a = needfield(L, "pulse.sine", "amplitude", 0, 1.0), w = needfield(L, "pulse.sine", "omega", 1, 0),
         ph = needfield(L, "pulse.sine", "phase", 0, 0.0);
  lua_getfield(L, 1, "envelope");
  const lvs_pulse *env = NULL;
  if (!lua_isnil(L, -1)) {
    lvs_pulse **e = luaL_testudata(L, -1, LVS_PULSE_MT);
    if (!e || !*e) return luaL_error(L, "bad argument #1 to 'pulse.sine' (field 'envelope' must be a pulse)");
    env = *e;
  }
  lvs_pulse **out = newpulse(L);
  lvsL_check(L, lvsL_ctx(L), lvs_pulse_sine(lvsL_ctx(L), a, w, ph, env, out), "pulse.sine");
  return 1;
}

static int p_ramp(lua_State *L) {
  static const char *const known[] = {"from", "to", "start", "stop", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "pulse.ramp", 1);
  double f = needfield(L, "pulse.ramp", "from", 0, 0.0), t = needfield(L, "pulse.ramp", "to", 0, 1.0),
         s = needfield(L, "pulse.ramp", "start", 1, 0), e = needfield(L, "pulse.ramp", "stop", 1, 0);
  lvs_pulse **out = newpulse(L);
  lvsL_check(L, lvsL_ctx(L), lvs_pulse_ramp(lvsL_ctx(L), f, t, s, e, out), "pulse.ramp");
  return 1;
}

static int p_add(lua_State *L) {
  lvs_pulse *a = checkpulse(L, 1), *b = checkpulse(L, 2);
  lvs_pulse **out = newpulse(L);
  lvsL_check(L, lvsL_ctx(L), lvs_pulse_sum(a, b, out), "pulse add");
  return 1;
}

static int p_call(lua_State *L) {
  lvs_pulse *p = checkpulse(L, 1);
  lua_pushnumber(L, lvs_pulse_eval(p, luaL_checknumber(L, 2)));
  return 1;
}

static int p_gc(lua_State *L) {
  lvs_pulse **p = luaL_checkudata(L, 1, LVS_PULSE_MT);
  lvsL_gc_guard(L, "pulse");
  lvs_pulse_free(*p);
  *p = NULL;
  return 0;
}

static int p_tostring(lua_State *L) {
  lvs_pulse *p = checkpulse(L, 1);
  double lo, hi;
  lvs_pulse_support(p, &lo, &hi);
  lua_pushfstring(L, "pulse (nonzero within [%f, %f])", lo, hi);
  return 1;
}

/* ---- callbacks into Lua ----------------------------------------------------- */

typedef struct {
  lua_State *L;
  int fidx; /* absolute stack index of the Lua function */
  size_t n;
  char err[400];
} cbdata;

static int cb_pulse(void *ud, double t, double *value) {
  cbdata *cb = ud;
  lua_State *L = cb->L;
  lua_pushvalue(L, cb->fidx);
  lua_pushnumber(L, t);
  if (lua_pcall(L, 1, 1, 0) != LUA_OK) {
    snprintf(cb->err, sizeof cb->err, "the pulse function failed at t = %.17g: %s", t, lua_tostring(L, -1));
    lua_pop(L, 1);
    return 1;
  }
  if (lua_type(L, -1) != LUA_TNUMBER) {
    snprintf(cb->err, sizeof cb->err, "the pulse function returned %s at t = %.17g (number expected)",
             luaL_typename(L, -1), t);
    lua_pop(L, 1);
    return 1;
  }
  *value = lua_tonumber(L, -1);
  lua_pop(L, 1);
  if (isnan(*value)) {
    snprintf(cb->err, sizeof cb->err, "the pulse function returned NaN at t = %.17g", t);
    return 1;
  }
  return 0;
}

static int cb_field(void *ud, double t, double *v) {
  cbdata *cb = ud;
  lua_State *L = cb->L;
  lua_pushvalue(L, cb->fidx);
  lua_pushnumber(L, t);
  if (lua_pcall(L, 1, 1, 0) != LUA_OK) {
    snprintf(cb->err, sizeof cb->err, "the V function failed at t = %.17g: %s", t, lua_tostring(L, -1));
    lua_pop(L, 1);
    return 1;
  }
  lvs_matrix *m = lvsL_testmatrix(L, -1);
  if (!m) {
    snprintf(cb->err, sizeof cb->err, "the V function returned %s at t = %.17g (op expected)", luaL_typename(L, -1), t);
    lua_pop(L, 1);
    return 1;
  }
  size_t n = cb->n;
  if (lvs_matrix_rows(m) != n || lvs_matrix_cols(m) != n) {
    snprintf(cb->err, sizeof cb->err, "the V function returned a %zux%zu op at t = %.17g but H0 is %zux%zu",
             lvs_matrix_rows(m), lvs_matrix_cols(m), t, n, n);
    lua_pop(L, 1);
    return 1;
  }
  double scale = 0;
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double re, im;
      lvs_matrix_get(m, i, j, &re, &im);
      v[2 * (i + j * n)] = re, v[2 * (i + j * n) + 1] = im;
      if (isnan(re) || isnan(im)) {
        snprintf(cb->err, sizeof cb->err, "the V function returned NaN at t = %.17g", t);
        lua_pop(L, 1);
        return 1;
      }
      scale = fmax(scale, hypot(re, im));
    }
  size_t di, dj;
  double d = lvs_matrix_hermitian_defect(m, &di, &dj);
  lua_pop(L, 1);
  if (d > LVS_DEFAULT_HERM_TOL * (scale > 0 ? scale : 1)) {
    snprintf(cb->err, sizeof cb->err, "V(t) is not Hermitian at t = %.17g: |V(%zu,%zu) - conj(V(%zu,%zu))| = %.3g", t,
             di + 1, dj + 1, dj + 1, di + 1, d);
    return 1;
  }
  return 0;
}

/* ---- transitions --------------------------------------------------------------
 * userdata: lvs_transition*; user values: 1 = the Lua function (pulse or V)
 * or nil, 2 = kind (1 pulse function, 2 V function), 3 = cached exact result. */

static lvs_transition **newtr(lua_State *L) {
  lvs_transition **p = lua_newuserdatauv(L, sizeof *p, 3);
  *p = NULL;
  luaL_setmetatable(L, LVS_TRANSITION_MT);
  return p;
}

static lvs_transition *checktr(lua_State *L, int idx) {
  lvs_transition **p = luaL_checkudata(L, idx, LVS_TRANSITION_MT);
  if (!*p) luaL_argerror(L, idx, "attempt to use a freed transition");
  return *p;
}

static void raise_cb(lua_State *L, lvs_ctx *ctx, int st, cbdata *cb, const char *fname) {
  if (st == LVS_OK) return;
  if (cb->err[0]) {
    lvs_clear_error(ctx);
    luaL_error(L, "%s: %s", fname, cb->err);
  }
  lvsL_check(L, ctx, st, fname);
}

static int l_transition(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  static const char *const known[] = {"H0", "V", "pulse", "from", "t0", "t1", "order", "steps", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "transition", 1);
  lvs_transition_spec sp;
  memset(&sp, 0, sizeof sp);
  cbdata cb;
  memset(&cb, 0, sizeof cb);
  cb.L = L;
  lua_settop(L, 1);
  lua_getfield(L, 1, "H0"); /* 2 */
  sp.h0 = lvsL_testmatrix(L, 2);
  if (!sp.h0) return luaL_error(L, "bad argument #1 to 'transition' (field 'H0' must be an op, got %s)", luaL_typename(L, 2));
  size_t n = lvs_matrix_rows(sp.h0);
  cb.n = n;
  lua_getfield(L, 1, "V");     /* 3 */
  lua_getfield(L, 1, "pulse"); /* 4 */
  int kind = 0;
  if (lua_isfunction(L, 3)) {
    if (!lua_isnil(L, 4))
      return luaL_error(L, "bad argument #1 to 'transition' (V is a function of t: give no pulse)");
    kind = 2;
    cb.fidx = 3;
    sp.src.field_fn = cb_field;
    sp.src.ud = &cb;
  } else {
    sp.v = lvsL_testmatrix(L, 3);
    if (!sp.v)
      return luaL_error(L, "bad argument #1 to 'transition' (field 'V' must be an op or a function of t, got %s)",
                        luaL_typename(L, 3));
    if (lua_isfunction(L, 4)) {
      kind = 1;
      cb.fidx = 4;
      sp.src.pulse_fn = cb_pulse;
      sp.src.ud = &cb;
    } else {
      lvs_pulse **p = luaL_testudata(L, 4, LVS_PULSE_MT);
      if (!p || !*p)
        return luaL_error(L, "bad argument #1 to 'transition' (field 'pulse' must be a pulse or a function of t, got %s)",
                          luaL_typename(L, 4));
      sp.pulse = *p;
    }
  }
  lua_getfield(L, 1, "from");
  int isint = 0;
  lua_Integer from = lua_type(L, -1) == LUA_TNUMBER ? lua_tointegerx(L, -1, &isint) : 0;
  if (!isint)
    return luaL_error(L, "bad argument #1 to 'transition' (field 'from' must be an integer level, got %s)",
                      lua_isnil(L, -1) ? "nil" : luaL_tolstring(L, -1, NULL));
  lua_pop(L, 1);
  if (from < 1 || (size_t)from > n)
    return luaL_error(L, "bad argument #1 to 'transition' (from = %d is out of range 1..%d)", (int)from, (int)n);
  sp.from = (size_t)(from - 1);
  sp.t0 = needfield(L, "transition", "t0", 1, 0);
  sp.t1 = needfield(L, "transition", "t1", 1, 0);
  lua_Integer order = lvsL_optfield_int(L, 1, "order", 1, "transition", 1);
  if (order < 1 || order > 2)
    return luaL_error(L, "bad argument #1 to 'transition' (order must be 1 or 2, got %d)", (int)order);
  sp.order = (int)order;
  /* steps: nil = chosen from the problem (pulse time scales, or refined
   * until first order converges) */
  lua_Integer steps = lvsL_optfield_int(L, 1, "steps", 0, "transition", 1);
  lua_getfield(L, 1, "steps");
  int given = !lua_isnil(L, -1);
  lua_pop(L, 1);
  if (given && (steps < 8 || steps > 100000000))
    return luaL_error(L, "bad argument #1 to 'transition' (steps must be from 8 to 1e8, got %I)", (lua_Integer)steps);
  sp.steps = (size_t)steps;
  lvs_transition **out = newtr(L); /* 5 */
  if (kind) {
    lua_pushvalue(L, cb.fidx);
    lua_setiuservalue(L, 5, 1);
  }
  lua_pushinteger(L, kind);
  lua_setiuservalue(L, 5, 2);
  int st = lvs_transition_new(ctx, &sp, out);
  raise_cb(L, ctx, st, &cb, "transition");
  lua_settop(L, 5);
  return 1;
}

static size_t checklevel(lua_State *L, lvs_transition *tr, int idx) {
  lua_Integer to = luaL_checkinteger(L, idx);
  size_t n = lvs_transition_dim(tr);
  if (to < 1 || (size_t)to > n) {
    lua_pushfstring(L, "level %d is out of range 1..%d", (int)to, (int)n);
    luaL_argerror(L, idx, lua_tostring(L, -1));
  }
  return (size_t)(to - 1);
}

static void amp(lua_State *L, double *re, double *im) {
  lvs_transition *tr = checktr(L, 1);
  size_t to = checklevel(L, tr, 2);
  int order = -1;
  if (!lua_isnoneornil(L, 3)) {
    lua_Integer o = luaL_checkinteger(L, 3);
    int have = lvs_transition_order(tr);
    if (have > 0 && (o < 0 || o > have)) {
      lua_pushfstring(L, "order must be from 0 to %d, got %d", have, (int)o);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    order = (int)o;
  }
  lvsL_check(L, lvsL_ctx(L), lvs_transition_amplitude(tr, to, order, re, im), "amplitude");
}

static int t_amplitude(lua_State *L) {
  double re, im;
  amp(L, &re, &im);
  lua_pushnumber(L, re);
  lua_pushnumber(L, im);
  return 2;
}

static int t_probability(lua_State *L) {
  double re, im;
  amp(L, &re, &im);
  lua_pushnumber(L, re * re + im * im);
  return 1;
}

static int t_error(lua_State *L) {
  lvs_transition *tr = checktr(L, 1);
  size_t to = checklevel(L, tr, 2);
  double e;
  lvsL_check(L, lvsL_ctx(L), lvs_transition_error(tr, to, &e), "error");
  lua_pushnumber(L, e);
  return 1;
}

/* tr:exact([steps | {steps=, tol=, method=}]); the default call is cached. */
static int t_exact(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_transition *tr = checktr(L, 1);
  if (lvs_transition_order(tr) == 0) return luaL_error(L, "exact: this is already an exact result");
  lvs_exact_spec es = {LVS_EXACT_AUTO, 0, 0.0, 0};
  int dflt = lua_isnoneornil(L, 2);
  if (lua_istable(L, 2)) {
    static const char *const known[] = {"steps", "tol", "method", "max_steps", NULL};
    static const char *const methods[] = {"auto", "rk4", "magnus4", NULL};
    lvsL_checkoptions(L, 2, known, "exact", 1);
    lua_Integer steps = lvsL_optfield_int(L, 2, "steps", 0, "exact", 1);
    if (steps < 0 || steps > LVS_EXACT_MAX_STEPS)
      return luaL_error(L, "bad argument #1 to 'exact' (steps must be from 8 to %d, got %d)", (int)LVS_EXACT_MAX_STEPS,
                        (int)steps);
    es.steps = (size_t)steps;
    lua_Integer maxs = lvsL_optfield_int(L, 2, "max_steps", LVS_EXACT_MAX_STEPS, "exact", 1);
    if (maxs < 16 || maxs > LVS_EXACT_MAX_STEPS)
      return luaL_error(L, "bad argument #1 to 'exact' (max_steps must be from 16 to %d, got %d)", (int)LVS_EXACT_MAX_STEPS,
                        (int)maxs);
    es.max_steps = (size_t)maxs;
    lua_getfield(L, 2, "tol");
    if (!lua_isnil(L, -1)) {
      if (!lua_isnumber(L, -1))
        return luaL_error(L, "bad argument #1 to 'exact' (field 'tol' must be a number, got %s)", luaL_typename(L, -1));
      es.tol = lua_tonumber(L, -1);
      if (!(es.tol > 0) || isinf(es.tol))
        return luaL_error(L, "bad argument #1 to 'exact' (field 'tol' must be a positive number, got %f)", es.tol);
    }
    lua_pop(L, 1);
    lua_getfield(L, 2, "method");
    if (!lua_isnil(L, -1)) {
      const char *m = lua_tostring(L, -1);
      int k = -1;
      for (int q = 0; m && methods[q]; q++)
        if (strcmp(m, methods[q]) == 0) k = q;
      if (k < 0 || lua_type(L, -1) != LUA_TSTRING)
        return luaL_error(L, "bad argument #1 to 'exact' (field 'method' must be 'auto', 'rk4' or 'magnus4')");
      es.method = k == 0 ? LVS_EXACT_AUTO : k == 1 ? LVS_EXACT_RK4 : LVS_EXACT_MAGNUS4;
    }
    lua_pop(L, 1);
  } else if (!dflt) {
    lua_Integer steps = luaL_checkinteger(L, 2);
    if (steps < 8 || steps > LVS_EXACT_MAX_STEPS) return luaL_argerror(L, 2, "steps must be from 8 to 16777216");
    es.steps = (size_t)steps;
  }
  lua_settop(L, 2);
  if (dflt) {
    lua_getiuservalue(L, 1, 3);
    if (!lua_isnil(L, -1)) return 1; /* cached */
    lua_pop(L, 1);
  }
  lua_getiuservalue(L, 1, 1); /* 3: function or nil */
  lua_getiuservalue(L, 1, 2); /* 4: kind */
  int kind = (int)lua_tointeger(L, 4);
  cbdata cb;
  memset(&cb, 0, sizeof cb);
  cb.L = L;
  cb.fidx = 3;
  cb.n = lvs_transition_dim(tr);
  lvs_transition_source src = {kind == 1 ? cb_pulse : NULL, kind == 2 ? cb_field : NULL, &cb};
  lvs_transition **out = newtr(L); /* 5 */
  int st = lvs_transition_exact(tr, &src, &es, out);
  if (st == LVS_ENOCONV) { /* an expected numerical failure: nil, msg, code */
    lua_pushnil(L);
    lua_pushfstring(L, "exact: %s", lvs_errmsg(ctx));
    lua_pushinteger(L, st);
    lvs_clear_error(ctx);
    return 3;
  }
  raise_cb(L, ctx, st, &cb, "exact");
  if (dflt) {
    lua_pushvalue(L, 5);
    lua_setiuservalue(L, 1, 3);
  }
  lua_settop(L, 5);
  return 1;
}

static int t_steps(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_transition_steps(checktr(L, 1)));
  return 1;
}

static int t_warnings(lua_State *L) {
  lua_pushstring(L, lvs_transition_warnings(checktr(L, 1)));
  return 1;
}

static int t_dim(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_transition_dim(checktr(L, 1)));
  return 1;
}

static int t_energies(lua_State *L) {
  lvs_transition *tr = checktr(L, 1);
  size_t n = lvs_transition_dim(tr);
  const double *E = lvs_transition_energies(tr);
  if (!E) return luaL_error(L, "energies: not kept by an exact result (ask the transition it came from)");
  lua_createtable(L, (int)n, 0);
  for (size_t k = 0; k < n; k++) {
    lua_pushnumber(L, E[k]);
    lua_rawseti(L, -2, (lua_Integer)k + 1);
  }
  return 1;
}

static int t_gc(lua_State *L) {
  lvs_transition **p = luaL_checkudata(L, 1, LVS_TRANSITION_MT);
  lvsL_gc_guard(L, "transition");
  lvs_transition_free(*p);
  *p = NULL;
  return 0;
}

static int t_tostring(lua_State *L) {
  lvs_transition *tr = checktr(L, 1);
  int o = lvs_transition_order(tr);
  if (o == 0) lua_pushfstring(L, "transition (exact, %d levels)", (int)lvs_transition_dim(tr));
  else lua_pushfstring(L, "transition (order %d, %d levels)", o, (int)lvs_transition_dim(tr));
  return 1;
}

static int t_index(lua_State *L) {
  const char *k = luaL_checkstring(L, 2);
  if (strcmp(k, "warning") == 0) {
    const char *w = lvs_transition_warnings(checktr(L, 1));
    if (*w) lua_pushstring(L, w);
    else lua_pushnil(L);
    return 1;
  }
  lua_getmetatable(L, 1);
  lua_getfield(L, -1, "_methods");
  lua_getfield(L, -1, k);
  return 1;
}

/* ---- Fermi's golden rule --------------------------------------------------------
 * ls.golden_rule{V=, rho= | band={...}, E=, omega=, process=, broadening=,
 *                shape=, couplings=} -> rate, {rho=, energy=, spacing=, warning=} */

typedef struct {
  lua_State *L;
  int fidx;
  char err[300];
} doscb;

static int cb_dos(void *ud, double E, double *rho) {
  doscb *cb = ud;
  lua_State *L = cb->L;
  lua_pushvalue(L, cb->fidx);
  lua_pushnumber(L, E);
  if (lua_pcall(L, 1, 1, 0) != LUA_OK) {
    snprintf(cb->err, sizeof cb->err, "field 'rho' failed at E = %.17g: %s", E, lua_tostring(L, -1));
    lua_pop(L, 1);
    return 1;
  }
  if (lua_type(L, -1) != LUA_TNUMBER) {
    snprintf(cb->err, sizeof cb->err, "field 'rho' returned %s at E = %.17g (number expected)", luaL_typename(L, -1), E);
    lua_pop(L, 1);
    return 1;
  }
  *rho = lua_tonumber(L, -1);
  lua_pop(L, 1);
  if (!(*rho >= 0) || isinf(*rho)) {
    snprintf(cb->err, sizeof cb->err, "field 'rho' returned %g at E = %.17g (a finite density >= 0 expected)", *rho, E);
    return 1;
  }
  return 0;
}

/* reads array field `key` of table 1 into a userdata buffer (so nothing
 * malloc'd is held across a raise); returns its length */
static double *numarray(lua_State *L, const char *key, size_t *len) {
  lua_getfield(L, 1, key);
  int t = lua_gettop(L);
  if (!lua_istable(L, t))
    luaL_error(L, "bad argument #1 to 'golden_rule' (field '%s' must be an array of numbers, got %s)", key,
               luaL_typename(L, t));
  lua_Integer n = luaL_len(L, t);
  if (n < 1 || n > 100000000)
    luaL_error(L, "bad argument #1 to 'golden_rule' (field '%s' must hold 1 to 1e8 numbers, got %d)", key, (int)n);
  double *buf = lua_newuserdatauv(L, (size_t)n * sizeof(double), 0);
  for (lua_Integer k = 1; k <= n; k++) {
    lua_rawgeti(L, t, k);
    if (lua_type(L, -1) != LUA_TNUMBER)
      luaL_error(L, "bad argument #1 to 'golden_rule' (field '%s' entry %d must be a number, got %s)", key, (int)k,
                 luaL_typename(L, -1));
    buf[k - 1] = lua_tonumber(L, -1);
    if (!isfinite(buf[k - 1]))
      luaL_error(L, "bad argument #1 to 'golden_rule' (field '%s' entry %d is not finite)", key, (int)k);
    lua_pop(L, 1);
  }
  lua_remove(L, t); /* keep the buffer on the stack */
  *len = (size_t)n;
  return buf;
}

/* golden_rule's phase 1: the process (constant, absorption, emission) and omega */
static void golden_process(lua_State *L, lvs_golden_spec *sp) {
  lua_getfield(L, 1, "omega");
  int have_omega = !lua_isnil(L, -1);
  lua_pop(L, 1);
  lua_getfield(L, 1, "process");
  const char *proc = lua_isnil(L, -1) ? NULL : lua_tostring(L, -1);
  if (!lua_isnil(L, -1) && lua_type(L, -1) != LUA_TSTRING)
    luaL_error(L, "bad argument #1 to 'golden_rule' (field 'process' must be 'constant', 'absorption' or 'emission')");
  lua_pop(L, 1);
  if (!proc) sp->process = have_omega ? LVS_GOLDEN_ABSORPTION : LVS_GOLDEN_CONSTANT;
  else if (strcmp(proc, "constant") == 0) sp->process = LVS_GOLDEN_CONSTANT;
  else if (strcmp(proc, "absorption") == 0) sp->process = LVS_GOLDEN_ABSORPTION;
  else if (strcmp(proc, "emission") == 0) sp->process = LVS_GOLDEN_EMISSION;
  else
    luaL_error(L, "bad argument #1 to 'golden_rule' (field 'process' must be 'constant', 'absorption' or 'emission', got '%s')",
                      proc);
  if (sp->process == LVS_GOLDEN_CONSTANT && have_omega)
    luaL_error(L, "bad argument #1 to 'golden_rule' (field 'omega' given with process 'constant')");
  if (sp->process != LVS_GOLDEN_CONSTANT) {
    if (!have_omega)
      luaL_error(L, "bad argument #1 to 'golden_rule' (field 'omega' is required for process '%s')", proc);
    sp->omega = needfield(L, "golden_rule", "omega", 1, 0);
    if (!(sp->omega > 0) || isinf(sp->omega))
      luaL_error(L, "bad argument #1 to 'golden_rule' (field 'omega' must be a finite number > 0, got %f)", sp->omega);
  }
}

/* golden_rule's phase 3 for a band: the levels (stack 3), their couplings
 * (stack 4, when given), the broadening and the line shape; stack 2 a
 * placeholder */
static void golden_band(lua_State *L, lvs_golden_spec *sp, int has_couplings) {
  lua_pushnil(L); /* 2: placeholder */
  size_t nb = 0, nc = 0;
  sp->band = numarray(L, "band", &nb); /* 3 */
  sp->nband = nb;
  if (has_couplings) {
    sp->band_coupling = numarray(L, "couplings", &nc); /* 4 */
    if (nc != nb)
      luaL_error(L, "bad argument #1 to 'golden_rule' (field 'couplings' has %d entries but 'band' has %d)", (int)nc,
                        (int)nb);
  }
  sp->broadening = needfield(L, "golden_rule", "broadening", 1, 0);
  if (!(sp->broadening > 0) || isinf(sp->broadening))
    luaL_error(L, "bad argument #1 to 'golden_rule' (field 'broadening' must be a finite number > 0, got %f)",
                      sp->broadening);
  lua_getfield(L, 1, "shape");
  const char *shape = lua_isnil(L, -1) ? "lorentzian" : lua_tostring(L, -1);
  if (!shape || lua_type(L, -1) == LUA_TNUMBER ||
      (strcmp(shape, "lorentzian") != 0 && strcmp(shape, "gaussian") != 0))
    luaL_error(L, "bad argument #1 to 'golden_rule' (field 'shape' must be 'lorentzian' or 'gaussian')");
  sp->shape = strcmp(shape, "gaussian") == 0 ? LVS_BAND_GAUSSIAN : LVS_BAND_LORENTZIAN;
  lua_pop(L, 1);
}

/* golden_rule's result: the rate, then {rho, energy, spacing, bandwidth, warning} */
static int golden_push(lua_State *L, const lvs_golden_spec *sp, const lvs_golden_result *r) {
  lua_pushnumber(L, r->rate);
  lua_createtable(L, 0, 6);
  lua_pushnumber(L, r->rho);
  lua_setfield(L, -2, "rho");
  lua_pushnumber(L, r->final_energy);
  lua_setfield(L, -2, "energy");
  if (sp->band) {
    lua_pushnumber(L, r->spacing);
    lua_setfield(L, -2, "spacing");
    lua_pushnumber(L, r->bandwidth);
    lua_setfield(L, -2, "bandwidth");
  }
  if (r->warning[0]) {
    lua_pushstring(L, r->warning);
    lua_setfield(L, -2, "warning");
  }
  return 2;
}

static int l_golden(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  static const char *const known[] = {"V", "rho", "band", "E", "omega", "process", "broadening", "shape", "couplings", NULL};
  luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "golden_rule", 1);
  lua_settop(L, 1);
  lvs_golden_spec sp;
  memset(&sp, 0, sizeof sp);
  doscb cb;
  memset(&cb, 0, sizeof cb);
  cb.L = L;
  sp.energy = needfield(L, "golden_rule", "E", 0, 0.0);
  if (!isfinite(sp.energy)) return luaL_error(L, "bad argument #1 to 'golden_rule' (field 'E' must be finite)");
  golden_process(L, &sp);
  /* density of states */
  lua_getfield(L, 1, "rho");
  lua_getfield(L, 1, "band");
  int has_rho = !lua_isnil(L, -2), has_band = !lua_isnil(L, -1);
  lua_pop(L, 2);
  if (has_rho == has_band)
    return luaL_error(L, "bad argument #1 to 'golden_rule' (give one of 'rho' (a number or a function of E) and 'band')");
  lua_getfield(L, 1, "couplings");
  int has_couplings = !lua_isnil(L, -1);
  lua_pop(L, 1);
  lua_getfield(L, 1, "V");
  int has_v = !lua_isnil(L, -1);
  lua_pop(L, 1);
  if (has_couplings && !has_band)
    return luaL_error(L, "bad argument #1 to 'golden_rule' (field 'couplings' needs a 'band')");
  if (has_couplings == has_v)
    return luaL_error(L, "bad argument #1 to 'golden_rule' (give the coupling 'V' (a number), or 'couplings' with a band)");
  if (has_v) {
    sp.coupling = needfield(L, "golden_rule", "V", 1, 0);
    if (!isfinite(sp.coupling)) return luaL_error(L, "bad argument #1 to 'golden_rule' (field 'V' must be finite)");
    sp.coupling = fabs(sp.coupling);
  }
  if (has_rho) {
    lua_getfield(L, 1, "rho"); /* 2 */
    if (lua_isfunction(L, 2)) {
      cb.fidx = 2;
      sp.dos_fn = cb_dos;
      sp.ud = &cb;
    } else if (lua_type(L, 2) == LUA_TNUMBER) {
      sp.has_rho = 1;
      sp.rho = lua_tonumber(L, 2);
      if (!(sp.rho >= 0) || isinf(sp.rho))
        return luaL_error(L, "bad argument #1 to 'golden_rule' (field 'rho' must be a finite number >= 0, got %f)", sp.rho);
    } else {
      return luaL_error(L, "bad argument #1 to 'golden_rule' (field 'rho' must be a number or a function of E, got %s)",
                        luaL_typename(L, 2));
    }
  } else {
    golden_band(L, &sp, has_couplings);
  }
  lvs_golden_result r;
  int st = lvs_golden_rate(ctx, &sp, &r);
  if (st && cb.err[0]) {
    lvs_clear_error(ctx);
    return luaL_error(L, "bad argument #1 to 'golden_rule' (%s)", cb.err);
  }
  lvsL_check(L, ctx, st, "golden_rule");
  return golden_push(L, &sp, &r);
}

void lvsL_open_transition(lua_State *L, int ctxidx) {
  int mod = lua_gettop(L);
  /* pulse metatable */
  luaL_newmetatable(L, LVS_PULSE_MT);
  static const luaL_Reg pmt[] = {{"__add", p_add}, {"__call", p_call}, {"__gc", p_gc}, {"__tostring", p_tostring},
                                 {NULL, NULL}};
  lvsL_setfuncs(L, pmt, ctxidx);
  lua_pop(L, 1);
  /* ls.pulse */
  lua_newtable(L);
  static const luaL_Reg pf[] = {{"gaussian", p_gaussian}, {"square", p_square}, {"sine", p_sine}, {"ramp", p_ramp},
                                {NULL, NULL}};
  lvsL_setfuncs(L, pf, ctxidx);
  lua_setfield(L, mod, "pulse");
  /* transition metatable */
  luaL_newmetatable(L, LVS_TRANSITION_MT);
  static const luaL_Reg tmt[] = {{"__gc", t_gc}, {"__tostring", t_tostring}, {"__index", t_index}, {NULL, NULL}};
  lvsL_setfuncs(L, tmt, ctxidx);
  lua_newtable(L);
  static const luaL_Reg tm[] = {{"amplitude", t_amplitude}, {"probability", t_probability}, {"error", t_error},
                                {"exact", t_exact},         {"warnings", t_warnings},       {"dim", t_dim},
                                {"energies", t_energies},   {"steps", t_steps},             {NULL, NULL}};
  lvsL_setfuncs(L, tm, ctxidx);
  lua_setfield(L, -2, "_methods");
  lua_pop(L, 1);
  static const luaL_Reg fns[] = {{"transition", l_transition}, {"golden_rule", l_golden}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

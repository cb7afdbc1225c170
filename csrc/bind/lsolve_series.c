/* lsolve_series.c -- ls.perturb_solve(H0, V, {order=, level= | state=,
 * energy=}) -> "levelshift.solveseries": the RS series of one level of a
 * large sparse/banded H0 by one linear solve per order (Dalgarno-Lewis).
 *
 * A separate function from ls.perturb on purpose: it takes one eigenpair
 * instead of the spectrum, handles one level, never forms a dense matrix,
 * and its object answers s:energy(k) rather than s:energy(level, k). */
#include <math.h>
#include <string.h>
#include "bind/lbind.h"

#define LVS_SOLVESERIES_MT "levelshift.solveseries"

static lvs_dlseries *checkds(lua_State *L, int idx) {
  lvs_dlseries **p = luaL_checkudata(L, idx, LVS_SOLVESERIES_MT);
  if (!*p) luaL_argerror(L, idx, "attempt to use a closed series");
  return *p;
}

static int ds_gc(lua_State *L) {
  lvs_dlseries **p = luaL_checkudata(L, 1, LVS_SOLVESERIES_MT);
  lvs_dlseries_free(*p);
  *p = NULL;
  return 0;
}

static int checkk(lua_State *L, lvs_dlseries *s, int idx) {
  int ok;
  lua_Integer k = lua_tointegerx(L, idx, &ok);
  if (!ok) luaL_argerror(L, idx, "order must be an integer");
  if (k < 0 || k > lvs_dlseries_order(s)) {
    lua_pushfstring(L, "order must be from 0 to %d, got %d", lvs_dlseries_order(s), (int)k);
    luaL_argerror(L, idx, lua_tostring(L, -1));
  }
  return (int)k;
}

static int ds_energy(lua_State *L) {
  lvs_dlseries *s = checkds(L, 1);
  double e;
  lvs_dlseries_energy(s, checkk(L, s, 2), &e);
  lua_pushnumber(L, e);
  return 1;
}

static int ds_at(lua_State *L) {
  lvs_dlseries *s = checkds(L, 1);
  double lam = luaL_checknumber(L, 2);
  luaL_argcheck(L, isfinite(lam), 2, "lambda must be finite");
  int k = lua_isnoneornil(L, 3) ? -1 : checkk(L, s, 3);
  double e;
  lvs_dlseries_at(s, lam, k, &e);
  lua_pushnumber(L, e);
  return 1;
}

/* s:state(k) -> n x 1 op (psi(k), intermediate normalization) */
static int ds_state(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_dlseries *s = checkds(L, 1);
  int k = checkk(L, s, 2);
  if (k == lvs_dlseries_order(s)) {
    lua_pushfstring(L, "the state of order %d needs a series of order %d", k, k + 1);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  size_t n = lvs_dlseries_dim(s);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_new(ctx, n, 1, 0, out), "state");
  memcpy(lvs_matrix_data(*out), lvs_dlseries_state(s, k), n * sizeof(double));
  return 1;
}

static int ds_info(lua_State *L) {
  lvs_dlseries *s = checkds(L, 1);
  lua_createtable(L, 0, 4);
  lua_pushinteger(L, (lua_Integer)lvs_dlseries_dim(s));
  lua_setfield(L, -2, "dim");
  lua_pushinteger(L, (lua_Integer)lvs_dlseries_band(s));
  lua_setfield(L, -2, "bandwidth");
  lua_pushstring(L, lvs_dlseries_solver(s));
  lua_setfield(L, -2, "solver");
  double g = lvs_dlseries_gap(s);
  if (!isnan(g)) {
    lua_pushnumber(L, g);
    lua_setfield(L, -2, "gap");
  }
  return 1;
}

static int ds_order(lua_State *L) {
  lua_pushinteger(L, lvs_dlseries_order(checkds(L, 1)));
  return 1;
}

static int ds_tostring(lua_State *L) {
  lvs_dlseries **p = luaL_checkudata(L, 1, LVS_SOLVESERIES_MT);
  if (!*p) {
    lua_pushliteral(L, "linear-solve series (closed)");
    return 1;
  }
  lvs_dlseries *s = *p;
  luaL_Buffer b;
  luaL_buffinit(L, &b);
  lua_pushfstring(L, "linear-solve RS series: %d states, bandwidth %d, solver %s\n",
                  (int)lvs_dlseries_dim(s), (int)lvs_dlseries_band(s), lvs_dlseries_solver(s));
  luaL_addvalue(&b);
  char line[64];
  for (int k = 0; k <= lvs_dlseries_order(s); k++) {
    double e;
    lvs_dlseries_energy(s, k, &e);
    snprintf(line, sizeof line, "  E(%d) = %.15g\n", k, e);
    luaL_addstring(&b, line);
  }
  luaL_pushresult(&b);
  return 1;
}

static int l_perturb_solve(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h0 = lvsL_checkmatrix(L, 1);
  lvs_matrix *v = lvsL_checkmatrix(L, 2);
  static const char *const known[] = {"order", "level", "state", "energy", NULL};
  lvsL_checkoptions(L, 3, known, "perturb_solve", 3);
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) {
    lua_pushfstring(L, "H0 must be square, got %dx%d", (int)n, (int)lvs_matrix_cols(h0));
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  if (lvs_matrix_is_complex(h0)) return luaL_argerror(L, 1, "H0 must be real (complex: use ls.perturb)");
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n) {
    lua_pushfstring(L, "V is %dx%d but H0 is %dx%d", (int)lvs_matrix_rows(v), (int)lvs_matrix_cols(v),
                    (int)n, (int)n);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  if (lvs_matrix_is_complex(v)) return luaL_argerror(L, 2, "V must be real (complex: use ls.perturb)");
  lua_Integer order = lvsL_optfield_int(L, 3, "order", 2, "perturb_solve", 3);
  if (order < 1 || order > 1000) {
    lua_pushfstring(L, "order must be from 1 to 1000, got %d", (int)order);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  lua_Integer level = lvsL_optfield_int(L, 3, "level", 1, "perturb_solve", 3);
  double energy = lvsL_optfield_num(L, 3, "energy", NAN, "perturb_solve", 3);
  lvs_matrix *state = NULL;
  double *sv = NULL;
  if (lua_istable(L, 3)) {
    lua_getfield(L, 3, "state");
    if (!lua_isnil(L, -1)) {
      state = lvsL_testmatrix(L, -1);
      if (!state) return luaL_argerror(L, 3, "option 'state' must be a matrix (n x 1 column)");
      if (lvs_matrix_rows(state) != n || lvs_matrix_cols(state) != 1) {
        lua_pushfstring(L, "option 'state' must be %dx1, got %dx%d", (int)n, (int)lvs_matrix_rows(state),
                        (int)lvs_matrix_cols(state));
        return luaL_argerror(L, 3, lua_tostring(L, -1));
      }
      if (lvs_matrix_is_complex(state)) return luaL_argerror(L, 3, "option 'state' must be real");
    }
    lua_getfield(L, 3, "level");
    int haslevel = !lua_isnil(L, -1);
    lua_pop(L, 2);
    if (state && haslevel) return luaL_argerror(L, 3, "give either 'level' or 'state', not both");
  }
  if (!state && (level < 1 || (lua_Unsigned)level > n)) {
    lua_pushfstring(L, "level must be from 1 to %d, got %d", (int)n, (int)level);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  if (!state && !isnan(energy)) return luaL_argerror(L, 3, "option 'energy' needs option 'state'");
  if (state) {
    sv = lua_newuserdatauv(L, n * sizeof(double), 0); /* GC-owned */
    for (size_t i = 0; i < n; i++) {
      double im;
      lvs_matrix_get(state, i, 0, &sv[i], &im);
    }
  }
  lvs_dlseries **out = lua_newuserdatauv(L, sizeof *out, 0);
  *out = NULL;
  luaL_setmetatable(L, LVS_SOLVESERIES_MT);
  lvs_dlseries_opts o = {state ? 0 : (size_t)(level - 1), sv, energy};
  int st = lvs_dlseries_new(h0, v, (int)order, &o, out);
  if (st == LVS_ENOTHERM) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, strncmp(lua_tostring(L, -1), "V ", 2) == 0 ? 2 : 1, lua_tostring(L, -1));
  }
  if (st == LVS_EINVAL && state) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "perturb_solve");
  return 1;
}

void lvsL_open_solve_series(lua_State *L, int ctxidx) {
  static const luaL_Reg meta[] = {{"__gc", ds_gc}, {"__close", ds_gc}, {"__tostring", ds_tostring},
                                  {NULL, NULL}};
  static const luaL_Reg methods[] = {{"energy", ds_energy}, {"at", ds_at},     {"state", ds_state},
                                     {"info", ds_info},     {"order", ds_order}, {"close", ds_gc},
                                     {NULL, NULL}};
  luaL_newmetatable(L, LVS_SOLVESERIES_MT);
  lvsL_setfuncs(L, meta, ctxidx);
  lua_newtable(L);
  lvsL_setfuncs(L, methods, ctxidx);
  lua_setfield(L, -2, "__index");
  lua_pop(L, 1);
  static const luaL_Reg fns[] = {{"perturb_solve", l_perturb_solve}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

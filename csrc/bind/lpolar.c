/* lpolar.c -- binding of the dynamic polarizability:
 *   ls.polarizability(H0, D, {level = n, omega = w | omegas = {...},
 *                     width = gamma, method = "auto"|"spectral"|"solves"})
 *   -> alpha (a number, a complex with width > 0, or a list for omegas), info
 * info = {energy =, first_resonance =, poles =, method =, note =}: note says
 * which frequencies lie at or above the first resonance (polar.c). */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "bind/lbind.h"

static int l_polarizability(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h0 = lvsL_checkmatrix(L, 1);
  lvs_matrix *d = lvsL_checkmatrix(L, 2);
  luaL_checktype(L, 3, LUA_TTABLE);
  static const char *const known[] = {"level", "omega", "omegas", "width", "method", NULL};
  lvsL_checkoptions(L, 3, known, "polarizability", 3);
  lua_Integer level = lvsL_optfield_int(L, 3, "level", 1, "polarizability", 3);
  size_t n = lvs_matrix_rows(h0);
  if (level < 1 || (size_t)level > n) {
    lua_pushfstring(L, "option 'level' must be from 1 to %d", (int)n);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  double width = lvsL_optfield_num(L, 3, "width", 0.0, "polarizability", 3);
  if (!(width >= 0) || !isfinite(width)) return luaL_argerror(L, 3, "option 'width' must be finite and >= 0");
  int path = 0;
  lua_getfield(L, 3, "method");
  if (!lua_isnil(L, -1)) {
    const char *m = lua_tostring(L, -1);
    if (!m || (strcmp(m, "auto") && strcmp(m, "spectral") && strcmp(m, "solves")))
      return luaL_argerror(L, 3, "option 'method' must be \"auto\", \"spectral\" or \"solves\"");
    path = !strcmp(m, "spectral") ? 1 : !strcmp(m, "solves") ? 2 : 0;
  }
  lua_pop(L, 1);
  int list = lua_getfield(L, 3, "omegas") != LUA_TNIL;
  int lidx = lua_gettop(L);
  int one = lua_getfield(L, 3, "omega") != LUA_TNIL;
  int oidx = lua_gettop(L);
  if (list == one) return luaL_argerror(L, 3, "give omega = w or omegas = {...} (one of them)");
  size_t nw = 1;
  if (list) {
    if (!lua_istable(L, lidx)) return luaL_argerror(L, 3, "option 'omegas' must be a list of numbers");
    nw = (size_t)lua_rawlen(L, lidx);
    if (nw == 0 || nw > 10000000) return luaL_argerror(L, 3, "option 'omegas' needs 1 to 1e7 frequencies");
  } else if (lua_type(L, oidx) != LUA_TNUMBER) {
    return luaL_argerror(L, 3, "option 'omega' must be a number");
  }
  double *w = lua_newuserdatauv(L, 3 * nw * sizeof(double), 0), *re = w + nw, *im = re + nw;
  for (size_t k = 0; k < nw; k++) {
    if (list) {
      if (lua_rawgeti(L, lidx, (lua_Integer)k + 1) != LUA_TNUMBER) {
        lua_pushfstring(L, "omegas[%d] must be a number", (int)k + 1);
        return luaL_argerror(L, 3, lua_tostring(L, -1));
      }
      w[k] = lua_tonumber(L, -1);
      lua_pop(L, 1);
    } else {
      w[k] = lua_tonumber(L, oidx);
    }
    if (!isfinite(w[k])) return luaL_argerror(L, 3, "frequencies must be finite");
  }
  lvs_polar_info info;
  lvsL_check(L, ctx, lvs_polarizability(h0, d, (size_t)level - 1, nw, w, width, path, re, im, &info),
             "polarizability");
  if (list) lua_createtable(L, (int)nw, 0);
  for (size_t k = 0; k < nw; k++) {
    if (width > 0) lvsL_pushcomplex(L, re[k], im[k]);
    else lua_pushnumber(L, re[k]);
    if (list) lua_rawseti(L, -2, (lua_Integer)k + 1);
  }
  lua_createtable(L, 0, 5);
  lua_pushnumber(L, info.energy);
  lua_setfield(L, -2, "energy");
  lua_pushnumber(L, info.first_pole);
  lua_setfield(L, -2, "first_resonance");
  lua_pushinteger(L, (lua_Integer)info.poles);
  lua_setfield(L, -2, "poles");
  lua_pushstring(L, info.path ? "solves" : "spectral");
  lua_setfield(L, -2, "method");
  size_t above = 0, first = 0;
  for (size_t k = 0; k < nw; k++)
    if (fabs(w[k]) >= info.first_pole && !above++) first = k;
  if (above) {
    char note[300];
    snprintf(note, sizeof note,
             "%zu of %zu frequencies (the first: omega = %.6g) are at or above the first resonance at %.6g%s: alpha "
             "there is the sum over the poles below, not a static-like response",
             above, nw, w[first], info.first_pole,
             info.path ? " (the nearest other level found; D may not reach it)" : "");
    lua_pushstring(L, note);
    lua_setfield(L, -2, "note");
  }
  return 2;
}

/* ls.magic_frequencies(H0, D, {levels = {a, b}, from =, to =, steps = 400})
 * -> ascending list of the omegas with alpha_a(omega) = alpha_b(omega) */
static int l_magic(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h0 = lvsL_checkmatrix(L, 1);
  lvs_matrix *d = lvsL_checkmatrix(L, 2);
  luaL_checktype(L, 3, LUA_TTABLE);
  static const char *const known[] = {"levels", "from", "to", "steps", NULL};
  lvsL_checkoptions(L, 3, known, "magic_frequencies", 3);
  size_t n = lvs_matrix_rows(h0);
  lua_Integer lv[2];
  if (lua_getfield(L, 3, "levels") != LUA_TTABLE || lua_rawlen(L, -1) != 2)
    return luaL_argerror(L, 3, "option 'levels' must be a list of two levels {a, b}");
  for (int q = 0; q < 2; q++) {
    int ok;
    lua_rawgeti(L, -1, q + 1);
    lv[q] = lua_tointegerx(L, -1, &ok);
    lua_pop(L, 1);
    if (!ok || lv[q] < 1 || (size_t)lv[q] > n) {
      lua_pushfstring(L, "option 'levels' must hold two levels from 1 to %d", (int)n);
      return luaL_argerror(L, 3, lua_tostring(L, -1));
    }
  }
  lua_pop(L, 1);
  double from = lvsL_optfield_num(L, 3, "from", 0.0, "magic_frequencies", 3);
  double to = lvsL_optfield_num(L, 3, "to", NAN, "magic_frequencies", 3);
  if (!isfinite(to)) return luaL_argerror(L, 3, "option 'to' (the highest frequency) is needed");
  lua_Integer steps = lvsL_optfield_int(L, 3, "steps", 400, "magic_frequencies", 3);
  if (steps < 1 || steps > 10000000) return luaL_argerror(L, 3, "option 'steps' must be from 1 to 1e7");
  size_t cap = 4096, found = 0;
  double *out = lua_newuserdatauv(L, cap * sizeof(double), 0);
  lvsL_check(L, ctx, lvs_polar_magic(h0, d, (size_t)lv[0] - 1, (size_t)lv[1] - 1, from, to, (size_t)steps, out,
                                     cap, &found), "magic_frequencies");
  lua_createtable(L, (int)found, 0);
  for (size_t k = 0; k < found; k++) {
    lua_pushnumber(L, out[k]);
    lua_rawseti(L, -2, (lua_Integer)k + 1);
  }
  return 1;
}

void lvsL_open_polar(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"polarizability", l_polarizability}, {"magic_frequencies", l_magic}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

/* lbox.c -- binding of the particle in a box: ls.box(N [, {width=, mass=,
 * centered=}]) and B:potential(f [, {tol=, breaks={...}}]). The Lua
 * potential is called from a C callback under lua_pcall, so a Lua error in
 * f never jumps across the core's allocations: the callback records the
 * reason, returns nonzero, the core frees what it holds and returns, and
 * only then does the binding raise. */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "bind/lbind.h"

static int l_box(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  if (lua_type(L, 1) != LUA_TNUMBER) return luaL_typeerror(L, 1, "integer N >= 1");
  int ok;
  lua_Integer n = lua_tointegerx(L, 1, &ok);
  luaL_argcheck(L, ok, 1, "number of states N must be an integer");
  luaL_argcheck(L, n >= 1, 1, "number of states N must be at least 1");
  luaL_argcheck(L, n <= 100000, 1, "number of states N must be at most 100000");
  static const char *const known[] = {"width", "mass", "centered", NULL};
  lvsL_checkoptions(L, 2, known, "box", 2);
  double w = lvsL_optfield_num(L, 2, "width", 1.0, "box", 2);
  double m = lvsL_optfield_num(L, 2, "mass", 1.0, "box", 2);
  if (!(w > 0) || !isfinite(w)) {
    lua_pushfstring(L, "width must be positive and finite, got %f", w);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  if (!(m > 0) || !isfinite(m)) {
    lua_pushfstring(L, "mass must be positive and finite, got %f", m);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  int centered = 0;
  if (!lua_isnoneornil(L, 2)) {
    int t = lua_getfield(L, 2, "centered");
    if (t != LUA_TNIL && t != LUA_TBOOLEAN) return luaL_argerror(L, 2, "option 'centered' must be a boolean");
    centered = lua_toboolean(L, -1);
    lua_pop(L, 1);
  }
  lvs_basis **out = lvsL_newbasis(L);
  lvsL_check(L, ctx, lvs_basis_box(ctx, (size_t)n, w, m, centered, out), "box");
  return 1;
}

/* B:potential(f [, {tol=, breaks=}]) -> op, error estimate */
static int b_potential(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  if (lvs_basis_kind_of(b) != LVS_BASIS_BOX)
    return luaL_error(L, "potential: the basis is not a box (make it with ls.box)");
  luaL_checktype(L, 2, LUA_TFUNCTION);
  static const char *const known[] = {"tol", "breaks", NULL};
  lvsL_checkoptions(L, 3, known, "potential", 2);
  lvs_box_quad q = {0, NULL, 0};
  q.tol = lvsL_optfield_num(L, 3, "tol", 0.0, "potential", 2);
  if (!(q.tol >= 0 && q.tol < 1)) return luaL_argerror(L, 2, "option 'tol' must be in [0, 1)");
  lua_settop(L, 3);
  if (!lua_isnil(L, 3)) {
    int t = lua_getfield(L, 3, "breaks"); /* slot 4 */
    if (t != LUA_TNIL) {
      if (t != LUA_TTABLE) return luaL_argerror(L, 2, "option 'breaks' must be a list of numbers");
      lua_Integer nb = luaL_len(L, 4);
      luaL_argcheck(L, nb >= 0 && nb <= 10000, 2, "option 'breaks' must have at most 10000 points");
      double *bk = lua_newuserdatauv(L, (size_t)(nb ? nb : 1) * sizeof(double), 0); /* slot 5 */
      double w, x0;
      lvs_box_params(b, &w, NULL, &x0);
      for (lua_Integer i = 1; i <= nb; i++) {
        lua_geti(L, 4, i);
        if (lua_type(L, -1) != LUA_TNUMBER) return luaL_argerror(L, 2, "option 'breaks' must be a list of numbers");
        bk[i - 1] = lua_tonumber(L, -1);
        lua_pop(L, 1);
        if (!(bk[i - 1] > x0 && bk[i - 1] < x0 + w)) {
          lua_pushfstring(L, "break point %d (x = %f) is not inside the box (%f, %f)", (int)i, bk[i - 1], x0, x0 + w);
          return luaL_argerror(L, 2, lua_tostring(L, -1));
        }
      }
      q.breaks = bk;
      q.nbreaks = (size_t)nb;
    }
  }
  lvsL_realcb cb;
  lvsL_realcb_init(&cb, L, 2);
  lvs_matrix **out = lvsL_newmatrix(L);
  double err = 0;
  int st = lvs_box_potential(b, lvsL_real_fn, &cb, &q, out, &err);
  lvsL_realcb_raise(L, ctx, st, &cb, "potential");
  if (st == LVS_ENOCONV) {
    luaL_pushfail(L);
    lua_pushfstring(L, "potential: %s", lvs_errmsg(ctx));
    lua_pushinteger(L, st);
    lvs_clear_error(ctx);
    return 3;
  }
  lvsL_check(L, ctx, st, "potential");
  lua_pushnumber(L, err);
  return 2;
}

void lvsL_open_box(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"box", l_box}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
  static const luaL_Reg methods[] = {{"potential", b_potential}, {NULL, NULL}};
  lua_getfield(L, -1, "_basis_methods");
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pop(L, 1);
}

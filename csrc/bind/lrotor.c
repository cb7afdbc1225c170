/* lrotor.c -- binding of the rigid rotor and angular-momentum coupling:
 * ls.rotor(Jmax [, {M = m}]), ls.clebsch(j1, m1, j2, m2, J, M),
 * ls.wigner3j(j1, j2, j3, m1, m2, m3). */
#include <math.h>
#include "bind/lbind.h"

static int l_rotor(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  if (lua_type(L, 1) != LUA_TNUMBER) return luaL_typeerror(L, 1, "integer Jmax >= 0");
  int ok;
  lua_Integer jmax = lua_tointegerx(L, 1, &ok);
  luaL_argcheck(L, ok, 1, "Jmax must be an integer");
  luaL_argcheck(L, jmax >= 0, 1, "Jmax must be at least 0");
  luaL_argcheck(L, jmax <= 2000, 1, "Jmax must be at most 2000");
  static const char *const known[] = {"M", "m", NULL};
  lvsL_checkoptions(L, 2, known, "rotor", 2);
  int all_m = 1;
  lua_Integer m = 0;
  if (!lua_isnoneornil(L, 2)) {
    int tM = lua_getfield(L, 2, "M"), tm = lua_getfield(L, 2, "m");
    if (tM != LUA_TNIL && tm != LUA_TNIL) return luaL_argerror(L, 2, "give M or m, not both");
    if (tM != LUA_TNIL) lua_pop(L, 1);
    if (tM != LUA_TNIL || tm != LUA_TNIL) {
      m = lua_tointegerx(L, -1, &ok);
      if (!ok) return luaL_argerror(L, 2, "option 'M' must be an integer");
      if (m > jmax || m < -jmax) {
        lua_pushfstring(L, "|M| = %d exceeds Jmax = %d", (int)(m < 0 ? -m : m), (int)jmax);
        return luaL_argerror(L, 2, lua_tostring(L, -1));
      }
      all_m = 0;
    }
  }
  lvs_basis **out = lvsL_newbasis(L);
  lvsL_check(L, ctx, lvs_basis_rotor(ctx, (int)jmax, all_m, (int)m, out), "rotor");
  return 1;
}

/* 2 * argument as an integer, or raise naming it */
static int twice(lua_State *L, int arg, const char *name, int is_j) {
  if (lua_type(L, arg) != LUA_TNUMBER) return luaL_typeerror(L, arg, "number (a multiple of 1/2)");
  double v = lua_tonumber(L, arg), t = 2.0 * v;
  if (!(t == floor(t)) || fabs(t) > 2000.0) {
    lua_pushfstring(L, "%s must be a multiple of 1/2 with |%s| <= 1000, got %f", name, name, v);
    return luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  if (is_j && t < 0) {
    lua_pushfstring(L, "%s must be non-negative, got %f", name, v);
    return luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  return (int)t;
}

static void check_m(lua_State *L, int arg, const char *mn, const char *jn, int tj, int tm) {
  if (tm > tj || tm < -tj) {
    lua_pushfstring(L, "|%s| = %f exceeds %s = %f", mn, fabs(tm / 2.0), jn, tj / 2.0);
    luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  if ((tj + tm) % 2 != 0) {
    lua_pushfstring(L, "%s + %s must be an integer (%s = %f, %s = %f)", jn, mn, jn, tj / 2.0, mn, tm / 2.0);
    luaL_argerror(L, arg, lua_tostring(L, -1));
  }
}

static int l_clebsch(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int tj1 = twice(L, 1, "j1", 1), tm1 = twice(L, 2, "m1", 0), tj2 = twice(L, 3, "j2", 1);
  int tm2 = twice(L, 4, "m2", 0), tJ = twice(L, 5, "J", 1), tM = twice(L, 6, "M", 0);
  check_m(L, 2, "m1", "j1", tj1, tm1);
  check_m(L, 4, "m2", "j2", tj2, tm2);
  check_m(L, 6, "M", "J", tJ, tM);
  double v;
  lvsL_check(L, ctx, lvs_clebsch_gordan(ctx, tj1, tm1, tj2, tm2, tJ, tM, &v), "clebsch");
  lua_pushnumber(L, v);
  return 1;
}

static int l_wigner3j(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int tj1 = twice(L, 1, "j1", 1), tj2 = twice(L, 2, "j2", 1), tj3 = twice(L, 3, "j3", 1);
  int tm1 = twice(L, 4, "m1", 0), tm2 = twice(L, 5, "m2", 0), tm3 = twice(L, 6, "m3", 0);
  check_m(L, 4, "m1", "j1", tj1, tm1);
  check_m(L, 5, "m2", "j2", tj2, tm2);
  check_m(L, 6, "m3", "j3", tj3, tm3);
  double v;
  lvsL_check(L, ctx, lvs_wigner_3j(ctx, tj1, tj2, tj3, tm1, tm2, tm3, &v), "wigner3j");
  lua_pushnumber(L, v);
  return 1;
}

void lvsL_open_rotor(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"rotor", l_rotor}, {"clebsch", l_clebsch}, {"wigner3j", l_wigner3j}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

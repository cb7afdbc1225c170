/* lcharge.c -- binding of the charge basis: ls.charge(N) -> basis of the
 * states n = -N..N with .n .n2 .cos .sin .cos2 .raise .lower (charge.c). */
#include "bind/lbind.h"

static int l_charge(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  if (lua_type(L, 1) != LUA_TNUMBER) return luaL_typeerror(L, 1, "integer N >= 1");
  int ok;
  lua_Integer N = lua_tointegerx(L, 1, &ok);
  luaL_argcheck(L, ok, 1, "N must be an integer (states n = -N..N)");
  luaL_argcheck(L, N >= 1, 1, "N must be at least 1 (states n = -N..N)");
  luaL_argcheck(L, N <= 1000000, 1, "N must be at most 1000000");
  lvs_basis **out = lvsL_newbasis(L);
  lvsL_check(L, ctx, lvs_basis_charge(ctx, (long)N, out), "charge");
  return 1;
}

void lvsL_open_charge(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"charge", l_charge}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

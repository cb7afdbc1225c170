/* lopfun.c -- binding of functions of an operator: A:fn(f) -> the op f(A)
 * of a Hermitian op A, f a Lua function of one number (opfun.c). */
#include "bind/lbind.h"

static int m_fn(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  luaL_checktype(L, 2, LUA_TFUNCTION);
  lvsL_realcb cb;
  lvsL_realcb_init(&cb, L, 2);
  lvs_matrix **out = lvsL_newmatrix(L);
  int st = lvs_matrix_function(a, lvsL_real_fn, &cb, out);
  lvsL_realcb_raise(L, ctx, st, &cb, "fn");
  lvsL_check(L, ctx, st, "fn");
  return 1;
}

/* adds fn to the matrix methods (core._matrix_methods, made by
 * lvsL_open_matrix before this) */
void lvsL_open_opfun(lua_State *L, int ctxidx) {
  static const luaL_Reg methods[] = {{"fn", m_fn}, {NULL, NULL}};
  lua_getfield(L, -1, "_matrix_methods");
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pop(L, 1);
}

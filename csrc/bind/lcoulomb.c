/* lcoulomb.c -- binding of the Coulomb-Sturmian hydrogen basis:
 *   ls.coulomb_basis{lmax=, nmax=, kappa=, m=, Z=} -> levelshift.basis
 * (kind "custom", labels n, l, m; operators B.H0, B.z, B.r, B.r2, B.L2,
 * B.Lz, and B.x, B.y with every m). See csrc/core/hydrogen.c for the
 * functions and formulas. */
#include <math.h>
#include <string.h>
#include "bind/lbind.h"

#define DEFAULT_LMAX 3
#define DEFAULT_NMAX 16
#define DEFAULT_KAPPA 0.5

static int l_coulomb_basis(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  static const char *const known[] = {"lmax", "nmax", "kappa", "m", "Z", NULL};
  if (!lua_isnoneornil(L, 1)) luaL_checktype(L, 1, LUA_TTABLE);
  lvsL_checkoptions(L, 1, known, "coulomb_basis", 1);
  lua_Integer lmax = lvsL_optfield_int(L, 1, "lmax", DEFAULT_LMAX, "coulomb_basis", 1);
  luaL_argcheck(L, lmax >= 0, 1, "lmax must be 0 or more");
  luaL_argcheck(L, lmax <= 200, 1, "lmax must be at most 200");
  lua_Integer nmax = lvsL_optfield_int(L, 1, "nmax", DEFAULT_NMAX, "coulomb_basis", 1);
  luaL_argcheck(L, nmax >= 1, 1, "nmax (radial functions per l) must be 1 or more");
  luaL_argcheck(L, nmax <= 2000, 1, "nmax (radial functions per l) must be at most 2000");
  double kappa = lvsL_optfield_num(L, 1, "kappa", DEFAULT_KAPPA, "coulomb_basis", 1);
  luaL_argcheck(L, kappa > 0.0 && isfinite(kappa), 1, "kappa must be a positive finite number (1/bohr)");
  double Z = lvsL_optfield_num(L, 1, "Z", 1.0, "coulomb_basis", 1);
  luaL_argcheck(L, Z > 0.0 && isfinite(Z), 1, "Z must be a positive finite number");
  int all_m = 1;
  lua_Integer m = 0;
  if (!lua_isnoneornil(L, 1)) {
    lua_getfield(L, 1, "m");
    if (lua_type(L, -1) == LUA_TSTRING) {
      luaL_argcheck(L, strcmp(lua_tostring(L, -1), "all") == 0, 1, "m must be an integer or \"all\"");
    } else if (!lua_isnil(L, -1)) {
      int ok;
      m = lua_tointegerx(L, -1, &ok);
      luaL_argcheck(L, ok, 1, "m must be an integer or \"all\"");
      all_m = 0;
    }
    lua_pop(L, 1);
  }
  if (!all_m && (m > lmax || m < -lmax)) {
    lua_pushfstring(L, "|m| = %d exceeds lmax = %d", (int)(m < 0 ? -m : m), (int)lmax);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvs_coulomb_spec sp = {.lmax = (int)lmax, .nfun = (int)nmax, .kappa = kappa, .Z = Z, .m = (int)m, .all_m = all_m};
  lvs_basis **out = lvsL_newbasis(L);
  lvsL_check(L, ctx, lvs_coulomb_basis(ctx, &sp, out), "coulomb_basis");
  return 1;
}

void lvsL_open_coulomb(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"coulomb_basis", l_coulomb_basis}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

/* lunits.c -- the CODATA 2018 table and unit conversion (units.c) for the
 * Lua sugar in lua/levelshift/units.lua (ls.units), which checks the
 * arguments and words the errors:
 *   core._constants() -> { name = {value=, uncertainty=, exact=, unit=, about=} }
 *   core._units()     -> { {name, kind}, ... } in table order
 *   core._unit_convert(value, from, to) -> number (raises on a bad unit) */
#include "bind/lbind.h"

static int l_constants(lua_State *L) {
  lua_newtable(L);
  const lvs_constant *c;
  for (size_t i = 0; (c = lvs_constant_at(i)) != NULL; i++) {
    lua_createtable(L, 0, 5);
    lua_pushnumber(L, c->value);
    lua_setfield(L, -2, "value");
    lua_pushnumber(L, c->uncertainty);
    lua_setfield(L, -2, "uncertainty");
    lua_pushboolean(L, c->uncertainty == 0);
    lua_setfield(L, -2, "exact");
    lua_pushstring(L, c->unit);
    lua_setfield(L, -2, "unit");
    lua_pushstring(L, c->about);
    lua_setfield(L, -2, "about");
    lua_setfield(L, -2, c->name);
  }
  return 1;
}

static int l_units(lua_State *L) {
  lua_newtable(L);
  const char *name, *kind;
  for (size_t i = 0; (name = lvs_unit_at(i, &kind)) != NULL; i++) {
    lua_createtable(L, 2, 0);
    lua_pushstring(L, name);
    lua_rawseti(L, -2, 1);
    lua_pushstring(L, kind);
    lua_rawseti(L, -2, 2);
    lua_rawseti(L, -2, (lua_Integer)i + 1);
  }
  return 1;
}

static int l_unit_convert(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  double v = luaL_checknumber(L, 1);
  const char *from = luaL_checkstring(L, 2);
  const char *to = luaL_checkstring(L, 3);
  double out = 0;
  lvsL_check(L, ctx, lvs_unit_convert(ctx, v, from, to, &out), "convert");
  lua_pushnumber(L, out);
  return 1;
}

void lvsL_open_units(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {
      {"_constants", l_constants}, {"_units", l_units}, {"_unit_convert", l_unit_convert}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

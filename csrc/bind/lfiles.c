/* lfiles.c -- core._recipe_files(dir): the recipe files in a directory;
 * core._write_file(path, text): a file written atomically.
 *
 * Lua has no portable way to list a directory, and the recipe loader
 * (lua/levelshift/recipes.lua) must list recipes/ for `levelshift --recipes`
 * and for the "known recipes" part of its error messages. To leak as little
 * as possible inside a sandboxed host, only names of the form NAME.lua with
 * NAME made of lowercase letters, digits and underscores (starting with a
 * letter) are returned, without the ".lua", in directory order.
 * Returns nil, message when the directory cannot be opened. */
#include <dirent.h>
#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include "bind/lbind.h"

static int recipe_name(const char *s, size_t *stem) {
  size_t n = strlen(s);
  if (n < 5 || strcmp(s + n - 4, ".lua") != 0) return 0;
  if (!(s[0] >= 'a' && s[0] <= 'z')) return 0;
  for (size_t i = 0; i < n - 4; i++) {
    char c = s[i];
    if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_')) return 0;
  }
  *stem = n - 4;
  return 1;
}

/* the DIR handle lives in a userdata so that a memory error raised while
 * building the table (a host may cap memory) cannot leak it */
static int dir_gc(lua_State *L) {
  DIR **p = lua_touserdata(L, 1);
  if (p && *p) {
    closedir(*p);
    *p = NULL;
  }
  return 0;
}

static int l_recipe_files(lua_State *L) {
  const char *dir = luaL_checkstring(L, 1);
  if (!lvsL_may_read(L, dir)) { /* a sandbox lists only its host's folders */
    luaL_pushfail(L);
    lua_pushfstring(L, "%s: not a folder this host reads recipes from", dir);
    return 2;
  }
  DIR **p = lua_newuserdatauv(L, sizeof *p, 0);
  *p = NULL;
  if (luaL_newmetatable(L, "levelshift.dirhandle")) {
    lua_pushcfunction(L, dir_gc);
    lua_setfield(L, -2, "__gc");
  }
  lua_setmetatable(L, -2);
  *p = opendir(dir);
  if (!*p) {
    luaL_pushfail(L);
    lua_pushfstring(L, "%s: %s", dir, strerror(errno));
    return 2;
  }
  lua_newtable(L);
  int n = 0;
  struct dirent *e;
  while ((e = readdir(*p)) != NULL) {
    size_t stem;
    if (recipe_name(e->d_name, &stem)) {
      lua_pushlstring(L, e->d_name, stem);
      lua_rawseti(L, -2, ++n);
    }
  }
  closedir(*p);
  *p = NULL;
  return 1;
}

/* core._write_file(path, text): text written atomically (lvs_write_file);
 * used by the Lua writers (JSON of sweeps). Raises on failure. */
static int l_write_file(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  const char *path = luaL_checkstring(L, 1);
  lvsL_may_write(L, "write", path);
  size_t len;
  const char *text = luaL_checklstring(L, 2, &len);
  lvsL_check(L, ctx, lvs_write_file(ctx, path, text, len), "write");
  return 0;
}

void lvsL_open_files(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"_recipe_files", l_recipe_files}, {"_write_file", l_write_file}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}

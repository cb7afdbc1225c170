/* embed.c -- the embedding API: a Lua state with levelshift preloaded.
 * Search order for the Lua sugar and recipes: directories added with
 * lvs_host_add_path, LVS_PATH from the environment, the source tree this
 * library was built from, then the install prefix. */
#include <lauxlib.h>
#include <lua.h>
#include <lualib.h>
#include <stdlib.h>
#include <string.h>
#include "levelshift.h"

LUALIB_API int luaopen_levelshift_core(lua_State *L);

struct lvs_host {
  lua_State *L;
  char *err;
};

static void set_err(lvs_host *h, const char *msg) {
  free(h->err);
  h->err = msg ? strdup(msg) : NULL;
}

static int traceback(lua_State *L) {
  const char *msg = lua_tostring(L, 1);
  if (msg == NULL) {
    if (luaL_callmeta(L, 1, "__tostring") && lua_type(L, -1) == LUA_TSTRING) return 1;
    msg = lua_pushfstring(L, "(error object is a %s value)", luaL_typename(L, 1));
  }
  luaL_traceback(L, L, msg, 1);
  return 1;
}

static void prepend_path(lua_State *L, const char *dir) {
  lua_getglobal(L, "package");
  lua_getfield(L, -1, "path");
  lua_pushfstring(L, "%s/lua/?.lua;%s/lua/?/init.lua;%s/?.lua;%s/?/init.lua;%s", dir, dir, dir, dir,
                  lua_tostring(L, -1));
  lua_setfield(L, -3, "path");
  lua_pop(L, 2);
}

int lvs_host_add_path(lvs_host *h, const char *dir) {
  if (!h || !dir) return 1;
  prepend_path(h->L, dir);
  return 0;
}

lvs_host *lvs_host_new(int flags) {
  lvs_host *h = calloc(1, sizeof *h);
  if (!h) return NULL;
  h->L = luaL_newstate();
  if (!h->L) {
    free(h);
    return NULL;
  }
  lua_State *L = h->L;
  luaL_openlibs(L);
  /* installed prefix last, then the source tree, then LVS_PATH first */
  prepend_path(L, LVS_INSTALL_LUA);
  prepend_path(L, LVS_SOURCE_DIR);
  const char *env = getenv("LVS_PATH");
  if (env && *env) prepend_path(L, env);
  luaL_getsubtable(L, LUA_REGISTRYINDEX, LUA_PRELOAD_TABLE);
  lua_pushcfunction(L, luaopen_levelshift_core);
  lua_setfield(L, -2, "levelshift.core");
  lua_pop(L, 1);
  if (flags & LVS_HOST_GLOBAL) {
    if (lvs_host_dostring(h, "ls = require 'levelshift'", "=init") != 0) return h;
  }
  return h;
}

void lvs_host_free(lvs_host *h) {
  if (!h) return;
  if (h->L) lua_close(h->L);
  free(h->err);
  free(h);
}

static int run(lvs_host *h, int status) {
  lua_State *L = h->L;
  if (status == LUA_OK) {
    lua_pushcfunction(L, traceback);
    lua_insert(L, -2);
    status = lua_pcall(L, 0, 0, -2);
  }
  if (status != LUA_OK) {
    set_err(h, lua_tostring(L, -1) ? lua_tostring(L, -1) : "(error object is not a string)");
    lua_settop(L, 0);
    return 1;
  }
  lua_settop(L, 0);
  set_err(h, NULL);
  return 0;
}

int lvs_host_dofile(lvs_host *h, const char *path) {
  if (!h) return 1;
  return run(h, luaL_loadfile(h->L, path));
}

int lvs_host_dostring(lvs_host *h, const char *code, const char *name) {
  if (!h || !code) return 1;
  return run(h, luaL_loadbuffer(h->L, code, strlen(code), name ? name : "=(string)"));
}

const char *lvs_host_error(const lvs_host *h) { return (h && h->err) ? h->err : ""; }
void *lvs_host_state(lvs_host *h) { return h ? h->L : NULL; }

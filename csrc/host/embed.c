/* embed.c -- the embedding API: a Lua state with levelshift preloaded.
 * Search order for the Lua sugar and recipes: directories added with
 * lvs_host_add_path, LVS_PATH from the environment, then either the source
 * tree (when this library runs from the build tree it was built in) or the
 * installed Lua directory found next to this library (an install moved with
 * `cmake --install --prefix OTHER`), then the configured install prefix. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <limits.h>
#include <lauxlib.h>
#include <lua.h>
#include <lualib.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "levelshift.h"

LUALIB_API int luaopen_levelshift_core(lua_State *L);

struct lvs_host {
  lua_State *L;
  char *err;
  size_t used, cap;                /* bytes through the allocator, cap (0 = none) */
  unsigned long long budget, spent; /* instruction budget per run (0 = none) */
};

#define HOOK_STEP 1000

/* Allocator that counts bytes and refuses to pass the cap; the core's
 * context takes the state's allocator, so the cap bounds both. */
static void *capped_alloc(void *ud, void *ptr, size_t osize, size_t nsize) {
  lvs_host *h = ud;
  if (ptr == NULL) osize = 0;
  if (nsize == 0) {
    free(ptr);
    h->used -= osize;
    return NULL;
  }
  if (h->cap && nsize > osize && h->used + (nsize - osize) > h->cap) return NULL;
  void *p = realloc(ptr, nsize);
  if (p) h->used = h->used - osize + nsize;
  return p;
}

static int panic(lua_State *L) {
  fprintf(stderr, "levelshift: unprotected error: %s\n", lua_tostring(L, -1));
  return 0;
}

static void count_hook(lua_State *L, lua_Debug *ar) {
  (void)ar;
  lvs_host *h = *(lvs_host **)lua_getextraspace(L);
  h->spent += HOOK_STEP;
  if (h->spent > h->budget) {
    lua_sethook(L, count_hook, LUA_MASKCOUNT, 1); /* keep raising if caught */
    char msg[64];
    snprintf(msg, sizeof msg, "instruction budget of %llu exhausted", h->budget);
    luaL_error(L, "%s", msg);
  }
}

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

/* Where this library runs from: inside the build tree it was built in,
 * return 0 (use the source tree); installed, write the Lua directory of that
 * install (LVS_REL_LUA relative to the library's folder) and return 1. */
static int own_lua_dir(char *out, size_t len) {
  Dl_info di;
  if (!dladdr((void *)lvs_host_new, &di) || !di.dli_fname) return 0;
  char *real = realpath(di.dli_fname, NULL);
  if (!real) return 0;
  size_t bl = strlen(LVS_BINARY_DIR);
  int in_build = !strncmp(real, LVS_BINARY_DIR, bl) && real[bl] == '/';
  char *slash = strrchr(real, '/');
  int ok = 0;
  if (!in_build && slash) {
    *slash = 0;
    ok = snprintf(out, len, "%s/%s", real, LVS_REL_LUA) < (int)len;
  }
  free(real);
  return ok;
}

int lvs_host_add_path(lvs_host *h, const char *dir) {
  if (!h || !dir) return 1;
  prepend_path(h->L, dir);
  return 0;
}

/* package.searchers[2] of a sandbox: the stock Lua-file searcher reads
 * precompiled chunks too, and mutated bytecode crashed the interpreter;
 * this one loads text chunks only (mode "t") and is otherwise the same
 * (package.searchpath on package.path, the file name as the loader's extra
 * value). */
static int searcher_text(lua_State *L) {
  const char *name = luaL_checkstring(L, 1);
  lua_getglobal(L, "package");
  if (!lua_istable(L, -1)) return luaL_error(L, "module '%s': no package table", name);
  lua_getfield(L, -1, "searchpath");
  lua_pushvalue(L, 1);
  lua_getfield(L, -3, "path");
  lua_call(L, 2, 2); /* file name, or nil and a message */
  if (lua_isnil(L, -2)) {
    lua_pushfstring(L, "\n\t%s", luaL_optstring(L, -1, ""));
    return 1;
  }
  const char *file = lua_tostring(L, -2);
  if (luaL_loadfilex(L, file, "t") != LUA_OK)
    return luaL_error(L, "error loading module '%s' from file '%s':\n\t%s", name, file, lua_tostring(L, -1));
  lua_pushstring(L, file);
  return 2;
}

/* Under an instruction budget two kinds of Lua code ran with the count
 * hook off: a message handler of xpcall that Lua calls for an error raised
 * by the hook itself (it runs inside the hook, where hooks are disabled:
 * `xpcall(loop, loop)` hung the host), and __gc finalizers (Lua turns
 * hooks off for them: 11 s under a 2e6 budget). So with a budget, xpcall
 * calls its handler after the stack has unwound (where the budget counts),
 * and never for the budget's own stop, and setmetatable refuses a
 * metatable with __gc (only a __gc present at setmetatable time makes an
 * object finalizable). */
static const char *const budget_lua =
    "local rawpcall, rawsetmt, pack, unpack = pcall, setmetatable, table.pack, table.unpack\n"
    "local function stop(e) return type(e) == 'string' and e:find('instruction budget of %d+ exhausted') end\n"
    "xpcall = function(f, msgh, ...)\n"
    "  local r = pack(rawpcall(f, ...))\n"
    "  if r[1] then return unpack(r, 1, r.n) end\n"
    "  if stop(r[2]) then error(r[2], 0) end\n"
    "  return false, msgh(r[2])\n"
    "end\n"
    "setmetatable = function(t, mt)\n"
    "  if type(mt) == 'table' and rawget(mt, '__gc') ~= nil then\n"
    "    error('setmetatable: __gc metamethods are disabled under an instruction budget', 2)\n"
    "  end\n"
    "  return rawsetmt(t, mt)\n"
    "end\n";

static const char *const sandbox_lua =
    "local rawload = load\n"
    "load = function(chunk, name, mode, env) return rawload(chunk, name, 't', env) end\n"
    "dofile, loadfile = nil, nil\n"
    "package.loadlib, package.cpath = nil, ''\n"
    "package.searchers[4], package.searchers[3] = nil, nil\n";

lvs_host *lvs_host_new(int flags) {
  lvs_host_opts o = {flags, 0, 0};
  return lvs_host_new_ex(&o);
}

size_t lvs_host_memory(const lvs_host *h) { return h ? h->used : 0; }

lvs_host *lvs_host_new_ex(const lvs_host_opts *opts) {
  lvs_host_opts o = {0, 0, 0};
  if (opts) o = *opts;
  int flags = o.flags;
  lvs_host *h = calloc(1, sizeof *h);
  if (!h) return NULL;
  h->cap = o.memory_cap;
  h->budget = o.instruction_budget;
  h->L = lua_newstate(capped_alloc, h);
  if (!h->L) {
    free(h);
    return NULL;
  }
  lua_State *L = h->L;
  lua_atpanic(L, panic);
  *(lvs_host **)lua_getextraspace(L) = h;
  if (flags & LVS_HOST_SANDBOX) {
    static const luaL_Reg safe[] = {{LUA_GNAME, luaopen_base}, {LUA_LOADLIBNAME, luaopen_package},
                                    {LUA_COLIBNAME, luaopen_coroutine}, {LUA_TABLIBNAME, luaopen_table},
                                    {LUA_STRLIBNAME, luaopen_string}, {LUA_MATHLIBNAME, luaopen_math},
                                    {LUA_UTF8LIBNAME, luaopen_utf8}, {NULL, NULL}};
    for (const luaL_Reg *r = safe; r->func; r++) {
      luaL_requiref(L, r->name, r->func, 1);
      lua_pop(L, 1);
    }
    lua_getglobal(L, LUA_LOADLIBNAME); /* text chunks only through require */
    lua_getfield(L, -1, "searchers");
    lua_pushcfunction(L, searcher_text);
    lua_rawseti(L, -2, 2);
    lua_pop(L, 2);
    lua_getglobal(L, LUA_STRLIBNAME); /* no bytecode out of functions either */
    lua_pushnil(L);
    lua_setfield(L, -2, "dump");
    lua_pop(L, 1);
  } else {
    luaL_openlibs(L);
  }
  /* configured install prefix last, then the source tree or the install
   * found next to this library, then LVS_PATH first */
  prepend_path(L, LVS_INSTALL_LUA);
  char own[PATH_MAX];
  if (own_lua_dir(own, sizeof own)) prepend_path(L, own);
  else prepend_path(L, LVS_SOURCE_DIR);
  const char *env = getenv("LVS_PATH");
  if (env && *env) prepend_path(L, env);
  if (flags & LVS_HOST_SANDBOX) { /* the module's writers read this (lvsL_no_files) */
    lua_pushboolean(L, 1);
    lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.sandbox");
  }
  luaL_getsubtable(L, LUA_REGISTRYINDEX, LUA_PRELOAD_TABLE);
  lua_pushcfunction(L, luaopen_levelshift_core);
  lua_setfield(L, -2, "levelshift.core");
  lua_pop(L, 1);
  if ((flags & LVS_HOST_SANDBOX) && lvs_host_dostring(h, sandbox_lua, "=sandbox") != 0) return h;
  if (h->budget && lvs_host_dostring(h, budget_lua, "=budget") != 0) return h;
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
  h->spent = 0;
  if (h->budget) lua_sethook(L, count_hook, LUA_MASKCOUNT, HOOK_STEP);
  if (status == LUA_OK) {
    lua_pushcfunction(L, traceback);
    lua_insert(L, -2);
    status = lua_pcall(L, 0, 0, -2);
  }
  lua_sethook(L, NULL, 0, 0);
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

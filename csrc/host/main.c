/* main.c -- the `levelshift` program: one embedding of the library.
 *
 *   levelshift FILE.lua [name=value ...]   run a script; the pairs reach it
 *                                          as a table (its `...` and the
 *                                          global `params`), numbers parsed
 *   levelshift -e CODE [name=value ...]    run a string
 *   levelshift --help | --version
 *
 * A Lua error prints "levelshift: message" and a traceback on stderr and
 * exits with status 1. */
#include <lauxlib.h>
#include <lua.h>
#include <lualib.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "levelshift.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: levelshift FILE.lua [name=value ...]\n"
          "       levelshift -e CODE [name=value ...]\n"
          "       levelshift RECIPE [name=value ...]   (a recipe by name; --recipes lists them)\n"
          "       levelshift --help | --version | --recipes\n"
          "\n"
          "Runs a Lua 5.4 script with the levelshift module loaded as the global `ls`.\n"
          "name=value pairs reach the script as a table: its `...` and the global\n"
          "`params` (values that look like numbers become numbers).\n");
}

static int traceback(lua_State *L) {
  const char *msg = lua_tostring(L, 1);
  if (!msg) msg = lua_pushfstring(L, "(error object is a %s value)", luaL_typename(L, 1));
  luaL_traceback(L, L, msg, 1);
  return 1;
}

/* push the params table from argv[first..] */
static int push_params(lua_State *L, int argc, char **argv, int first) {
  lua_newtable(L);
  for (int i = first; i < argc; i++) {
    const char *eq = strchr(argv[i], '=');
    if (!eq || eq == argv[i]) {
      fprintf(stderr, "levelshift: argument '%s' is not of the form name=value\n", argv[i]);
      return 0;
    }
    lua_pushlstring(L, argv[i], (size_t)(eq - argv[i]));
    const char *v = eq + 1;
    if (!lua_stringtonumber(L, v)) {
      if (strcmp(v, "true") == 0) lua_pushboolean(L, 1);
      else if (strcmp(v, "false") == 0) lua_pushboolean(L, 0);
      else lua_pushstring(L, v);
    }
    lua_settable(L, -3);
  }
  lua_pushvalue(L, -1);
  lua_setglobal(L, "params");
  return 1;
}

static int report(lua_State *L, int status) {
  if (status != LUA_OK) {
    const char *msg = lua_tostring(L, -1);
    fprintf(stderr, "levelshift: %s\n", msg ? msg : "(error object is not a string)");
    return 1;
  }
  return 0;
}

static int run_chunk(lua_State *L, int loadstatus, int argc, char **argv, int first) {
  if (loadstatus != LUA_OK) return report(L, loadstatus);
  if (!push_params(L, argc, argv, first)) return 2;
  lua_pushcfunction(L, traceback);
  lua_insert(L, -3);
  int st = lua_pcall(L, 1, 0, -3);
  return report(L, st);
}

int main(int argc, char **argv) {
  if (argc < 2) {
    usage(stderr);
    return 2;
  }
  if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h")) {
    usage(stdout);
    return 0;
  }
  if (!strcmp(argv[1], "--version")) {
    printf("levelshift %s (%s)\n", lvs_version(), LUA_RELEASE);
    return 0;
  }
  lvs_host *h = lvs_host_new(LVS_HOST_GLOBAL);
  if (!h) {
    fprintf(stderr, "levelshift: cannot create a Lua state\n");
    return 1;
  }
  if (*lvs_host_error(h)) {
    fprintf(stderr, "levelshift: %s\n", lvs_host_error(h));
    lvs_host_free(h);
    return 1;
  }
  lua_State *L = lvs_host_state(h);
  int rc;
  if (!strcmp(argv[1], "-e")) {
    if (argc < 3) {
      usage(stderr);
      rc = 2;
    } else {
      rc = run_chunk(L, luaL_loadbuffer(L, argv[2], strlen(argv[2]), "=(command line)"), argc, argv, 3);
    }
  } else if (!strcmp(argv[1], "--recipes") || (strchr(argv[1], '.') == NULL && strchr(argv[1], '/') == NULL)) {
    /* a recipe by name: handled by the Lua side */
    const char *code =
        "local name = ...; local ls = require 'levelshift'\n"
        "return ls._run_recipe(name, params)\n";
    int ls = luaL_loadbuffer(L, code, strlen(code), "=(recipe)");
    if (ls != LUA_OK) {
      rc = report(L, ls);
    } else if (!push_params(L, argc, argv, 2)) {
      rc = 2;
    } else {
      lua_pop(L, 1);
      lua_pushstring(L, !strcmp(argv[1], "--recipes") ? "" : argv[1]);
      lua_pushcfunction(L, traceback);
      lua_insert(L, -3);
      rc = report(L, lua_pcall(L, 1, 0, -3));
    }
  } else {
    rc = run_chunk(L, luaL_loadfile(L, argv[1]), argc, argv, 2);
  }
  lvs_host_free(h);
  return rc;
}

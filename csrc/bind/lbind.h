/* lbind.h -- helpers shared by the binding files (never installed). */
#ifndef LVS_LBIND_H
#define LVS_LBIND_H

#include <lauxlib.h>
#include <lua.h>
#include "levelshift.h"

#define LVS_MATRIX_MT "levelshift.matrix"
#define LVS_COMPLEX_MT "levelshift.complex"
#define LVS_BASIS_MT "levelshift.basis"
#define LVS_SITE_MT "levelshift.site"

/* Every binding function has the context userdata as upvalue 1. */
#define lvsL_ctx(L) (*(lvs_ctx **)lua_touserdata((L), lua_upvalueindex(1)))

/* Raise "fname: message" for a failed core status (no-op on LVS_OK). */
int lvsL_check(lua_State *L, lvs_ctx *ctx, int st, const char *fname);

/* matrices */
lvs_matrix **lvsL_newmatrix(lua_State *L);           /* pushes empty userdata */
lvs_matrix *lvsL_checkmatrix(lua_State *L, int idx); /* type + closed check */
lvs_matrix *lvsL_testmatrix(lua_State *L, int idx);  /* NULL if not a matrix */
/* ops of a product basis held as site sums (localsum.c): check and test
 * write one out on first use; pushlocalsum takes ownership of s;
 * testlocalsum: the sum of a not yet written-out op, else NULL */
void lvsL_pushlocalsum(lua_State *L, lvs_localsum *s);
lvs_localsum *lvsL_testlocalsum(lua_State *L, int idx);
/* a number or a levelshift.complex at idx: 1 and z set, else 0 */
int lvsL_toscalar(lua_State *L, int idx, double z[2]);
void lvsL_pushcomplex(lua_State *L, double re, double im);
/* read an integer option field of table at idx (default when nil) */
lua_Integer lvsL_optfield_int(lua_State *L, int idx, const char *key, lua_Integer def,
                              const char *fname, int argn);
double lvsL_optfield_num(lua_State *L, int idx, const char *key, double def, const char *fname,
                         int argn);
/* raise unless every key of options table at idx is in the NULL-ended list */
void lvsL_checkoptions(lua_State *L, int idx, const char *const *known, const char *fname, int argn);

/* bases */
lvs_basis *lvsL_checkbasis(lua_State *L, int idx);
lvs_basis **lvsL_newbasis(lua_State *L); /* pushes empty basis userdata */

/* per-object openers: each registers its functions into the module table on
 * top of the stack, with the context userdata as upvalue (at ctxidx) */
void lvsL_open_matrix(lua_State *L, int ctxidx);
void lvsL_open_basis(lua_State *L, int ctxidx);
void lvsL_open_eigen(lua_State *L, int ctxidx);
void lvsL_open_sweep(lua_State *L, int ctxidx);
void lvsL_open_effective(lua_State *L, int ctxidx);
void lvsL_open_series(lua_State *L, int ctxidx);
void lvsL_open_transition(lua_State *L, int ctxidx);
void lvsL_open_files(lua_State *L, int ctxidx);
void lvsL_open_coulomb(lua_State *L, int ctxidx);
void lvsL_open_box(lua_State *L, int ctxidx);
void lvsL_open_rotor(lua_State *L, int ctxidx);
void lvsL_open_charge(lua_State *L, int ctxidx);
void lvsL_open_opfun(lua_State *L, int ctxidx);
void lvsL_open_polar(lua_State *L, int ctxidx);
void lvsL_open_radial(lua_State *L, int ctxidx);
void lvsL_open_solve_series(lua_State *L, int ctxidx);
void lvsL_open_units(lua_State *L, int ctxidx);
void lvsL_open_random(lua_State *L, int ctxidx);
/* @@FEATURE-OPENERS@@ */

/* 1 when a binding function (one registered with the context as upvalue 1)
 * is active below the running function, or when running in a coroutine: a
 * close() then must not free what that binding may hold (it runs a callback
 * or a metamethod that closed the object); the free is left to __gc */
int lvsL_inside_binding(lua_State *L);
/* let the collector know about memory the core allocated (called before a
 * new matrix is made): a step worth the net growth since the last one */
/* in a sandboxed host: raise "FNAME: ..." unless the host granted a
 * writable directory and path (NULL: only the grant is asked) names a
 * regular file or a new one inside it (no '..', no link as the final
 * component, its folder resolving inside the directory); 0 otherwise */
int lvsL_may_write(lua_State *L, const char *fname, const char *path);
/* 1 unless a sandboxed host's file at path resolves outside every
 * directory the host reads modules and recipes from */
int lvsL_may_read(lua_State *L, const char *path);
void lvsL_gcstep(lua_State *L);
/* 1 when the running __gc was called by a script (getmetatable(x).__gc(x)),
 * 0 when Lua's collector runs it (the object is then unreachable) */
int lvsL_gc_by_hand(lua_State *L);
/* in a __gc: raise when a script calls it by hand while a binding below may
 * hold the object (the collector itself never gets here with one in use) */
void lvsL_gc_guard(lua_State *L, const char *what);

/* a Lua function of a real number as an lvs_real_fn: ud is an lvsL_realcb
 * with the function at stack index fidx; on failure err says why (the
 * point, the Lua error, a non-number or a NaN/inf result) */
typedef struct {
  lua_State *L;
  int fidx;
  int failed;
  char err[400];
} lvsL_realcb;
int lvsL_real_fn(void *ud, size_t n, const double *x, double *fx);
/* cb for the Lua function at stack index fidx */
void lvsL_realcb_init(lvsL_realcb *cb, lua_State *L, int fidx);
/* after a core call with cb: when the function itself failed (st != 0 and
 * cb->failed), clear the core's error and raise "FNAME: <its reason>" */
void lvsL_realcb_raise(lua_State *L, lvs_ctx *ctx, int st, const lvsL_realcb *cb, const char *fname);

/* register funcs with the ctx userdata as upvalue into table at -1 */
void lvsL_setfuncs(lua_State *L, const luaL_Reg *l, int ctxidx);

#endif

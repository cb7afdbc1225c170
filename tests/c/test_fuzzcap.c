/* test_fuzzcap.c -- the fuzz harness (tests/fuzz/harness.lua) inside an
 * embedding host with a small memory cap, so that allocations fail at
 * random places in Lua, the binding and the core. Checks: every call still
 * returns or raises a clear error, the host carries on, and memory comes
 * back: after each round (objects dropped, full collection) the bytes held
 * through the capped allocator return to the level of the first round
 * (a leak on an error path would grow it; common practice for OOM testing). */
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

static const char *const code =
    "local H = dofile('tests/fuzz/harness.lua')\n"
    "local F = H.new(ls, {seed = 6, dense_cap = 4 << 20})\n"
    "local ok, e = pcall(F.run, 2500)\n"
    "F.finish()\n"
    "collectgarbage('collect') collectgarbage('collect')\n"
    "local rep = F.report()\n"
    "assert(ok or tostring(e):find('not enough memory', 1, true), e)\n"
    "assert(#rep == 0, table.concat(rep, '\\n'))\n"
    "assert(F.calls > 1000, F.calls)\n"
    "fuzzcap_oom = (fuzzcap_oom or 0) + F.oom\n"
    "if os.getenv('LVS_FUZZCAP_VERBOSE') then print('calls', F.calls, 'errors', F.errors, 'out of memory', F.oom) end\n";

int main(void) {
  int fail = 0;
  size_t cap = 3u << 20;
  lvs_host_opts o = {LVS_HOST_GLOBAL, cap, 0, NULL, 0};
  lvs_host *h = lvs_host_new_ex(&o);
  if (!h) return 1;
  size_t base = 0;
  for (int round = 0; round < 3; round++) {
    if (lvs_host_dostring(h, code, "=fuzzcap")) {
      fprintf(stderr, "FAIL round %d: %s\n", round, lvs_host_error(h));
      fail++;
    }
    lvs_host_dostring(h, "collectgarbage('collect') collectgarbage('collect')", "=gc");
    size_t used = lvs_host_memory(h);
    if (used > cap) {
      fprintf(stderr, "FAIL memory %zu above the cap %zu\n", used, cap);
      fail++;
    }
    if (round == 0) base = used;
    else if (used > base + (64u << 10)) {
      fprintf(stderr, "FAIL memory grew from %zu to %zu bytes over round %d\n", base, used, round);
      fail++;
    }
  }
  /* the cap must have bitten, or this tested nothing */
  if (lvs_host_dostring(h, "assert(fuzzcap_oom > 0, 'the memory cap was never reached')", "=oom")) {
    fprintf(stderr, "FAIL %s\n", lvs_host_error(h));
    fail++;
  }
  if (lvs_host_dostring(h, "assert(ls.eigen(ls.spin(1).Sz)[1] == -1)", "=after")) {
    fprintf(stderr, "FAIL host unusable after the fuzz: %s\n", lvs_host_error(h));
    fail++;
  }
  lvs_host_free(h);
  if (!fail) printf("test_fuzzcap: all checks passed\n");
  return fail ? 1 : 0;
}

/* test_embed.c -- a tiny host embedding levelshift through levelshift.h. */
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

int main(void) {
  int fail = 0;
  lvs_host *h = lvs_host_new(LVS_HOST_GLOBAL);
  if (!h) return 1;
  if (lvs_host_dostring(h, "E = ls.eigen(ls.spin(1.5).Sz); assert(#E == 4 and E[1] == -1.5)", "=t1")) {
    fprintf(stderr, "FAIL run: %s\n", lvs_host_error(h));
    fail++;
  }
  /* a Lua error is reported, with a traceback, and the host carries on */
  if (lvs_host_dostring(h, "ls.spin(0.3)", "=t2") == 0 || !strstr(lvs_host_error(h), "multiple of 1/2") ||
      !strstr(lvs_host_error(h), "stack traceback")) {
    fprintf(stderr, "FAIL error not reported: %s\n", lvs_host_error(h));
    fail++;
  }
  if (lvs_host_dostring(h, "assert(E[4] == 1.5)", "=t3")) {
    fprintf(stderr, "FAIL state lost after an error: %s\n", lvs_host_error(h));
    fail++;
  }
  if (lvs_host_dofile(h, "/nonexistent/script.lua") == 0) {
    fprintf(stderr, "FAIL missing file accepted\n");
    fail++;
  }
  lvs_host_free(h);
  lvs_host_free(NULL);
  if (!fail) printf("test_embed: all checks passed\n");
  return fail ? 1 : 0;
}

/* check.h -- the C tests' one assertion: count a failure, say where, go on.
 * Each test's main returns failures != 0. */
#ifndef LVS_TEST_CHECK_H
#define LVS_TEST_CHECK_H
#include <stdio.h>

static int failures = 0;
#define CHECK(cond, ...)                                   \
  do {                                                     \
    if (!(cond)) {                                         \
      failures++;                                          \
      fprintf(stderr, "FAIL %s:%d: ", __FILE__, __LINE__); \
      fprintf(stderr, __VA_ARGS__);                        \
      fprintf(stderr, "\n");                               \
    }                                                      \
  } while (0)

#endif

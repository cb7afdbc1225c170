/* files.c -- files written atomically: data goes to PATH.tmp.PID, is flushed
 * and fsync'd, then renamed over PATH, so a reader (or a crash, or a full
 * disk) sees either the old file or the whole new one, never a part. */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "internal.h"

int lvs_write_file(lvs_ctx *ctx, const char *path, const void *data, size_t len) {
  if (!path || !*path) return lvsi_fail(ctx, LVS_EINVAL, "write needs a file path");
  if (!data && len) return lvsi_fail(ctx, LVS_EINVAL, "write: no data");
  /* PATH.tmp.PID: two processes writing one path never share a temporary */
  size_t tlen = strlen(path) + 32;
  char *tmpname = lvsi_malloc(ctx, tlen);
  if (!tmpname) return lvsi_fail(ctx, LVS_ENOMEM, "write: out of memory");
  snprintf(tmpname, tlen, "%s.tmp.%ld", path, (long)getpid());
  /* a new regular file only: never through a link planted at the name,
   * never over a file someone else made there */
  int fd = open(tmpname, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0644);
  if (fd < 0 && errno == EEXIST && unlink(tmpname) == 0) /* our own leftover of a crash */
    fd = open(tmpname, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0644);
  FILE *f = fd >= 0 ? fdopen(fd, "w") : NULL;
  if (!f && fd >= 0) close(fd);
  if (!f) {
    int e = errno;
    int st = lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (opening a temporary file beside it: %s)", path, strerror(e));
    lvsi_free(ctx, tmpname);
    return st;
  }
  int bad = len && fwrite(data, 1, len, f) != len, werr = bad ? errno : 0; /* ENOSPC ... */
  if (!bad && (fflush(f) != 0 || fsync(fileno(f)) != 0)) bad = 1, werr = errno;
  if (fclose(f) != 0 && !bad) bad = 1, werr = errno;
  if (bad) {
    remove(tmpname);
    lvsi_free(ctx, tmpname);
    return lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (error while writing: %s); the file is unchanged", path,
                     strerror(werr ? werr : EIO));
  }
  if (rename(tmpname, path) != 0) {
    int e = errno;
    remove(tmpname);
    lvsi_free(ctx, tmpname);
    return lvsi_fail(ctx, LVS_EINVAL, "cannot write '%s' (rename: %s)", path, strerror(e));
  }
  lvsi_free(ctx, tmpname);
  return LVS_OK;
}

/* An LD_PRELOAD library that makes the disk fail on purpose, for the fault tests.
 *
 * Only files under WAYMARK_FAULT_DIRECTORY are affected. WAYMARK_FAULT selects the fault:
 *   fsync:N   — every fsync/fdatasync after the first N such calls fails with EIO, as a disk
 *               that loses its write cache would report it;
 *   full:N    — writes fail with ENOSPC once N bytes have been written, as on a full disk of
 *               N bytes; statvfs on the directory reports the space left accordingly.
 * Other programs and files are untouched. It depends on nothing but libc; the interposed
 * functions have C linkage.
 */
#include <dlfcn.h>
#include <errno.h>
#include <atomic>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <sys/statvfs.h>
#include <sys/uio.h>
#include <unistd.h>

template <typename Function>
Function next_function(const char* name) {
  return reinterpret_cast<Function>(dlsym(RTLD_NEXT, name));
}

extern "C" {

static const char* fault_directory(void) {
  static const char* directory = nullptr;
  if (!directory) directory = getenv("WAYMARK_FAULT_DIRECTORY");
  return directory;
}

static int under_directory(int fd) {
  const char* directory = fault_directory();
  if (!directory || !*directory) return 0;
  char link[64], target[4096];
  snprintf(link, sizeof link, "/proc/self/fd/%d", fd);
  const ssize_t length = readlink(link, target, sizeof target - 1);
  if (length <= 0) return 0;
  target[length] = '\0';
  return strncmp(target, directory, strlen(directory)) == 0;
}

static long long limit_for(const char* kind) {
  const char* fault = getenv("WAYMARK_FAULT");
  const size_t kind_length = strlen(kind);
  if (!fault || strncmp(fault, kind, kind_length) != 0 || fault[kind_length] != ':') return -1;
  return atoll(fault + kind_length + 1);
}

static std::atomic<long long> syncs{0};
static std::atomic<long long> bytes_written{0};

static int sync_fails(int fd) {
  const long long limit = limit_for("fsync");
  if (limit < 0 || !under_directory(fd)) return 0;
  return syncs.fetch_add(1) >= limit;
}

static int disk_full(int fd, size_t count) {
  const long long limit = limit_for("full");
  if (limit < 0 || !under_directory(fd)) return 0;
  return bytes_written.fetch_add(static_cast<long long>(count)) + static_cast<long long>(count) > limit;
}

#define NEXT(name, type) static const auto real_##name = next_function<type>(#name)

int fsync(int fd) {
  NEXT(fsync, int (*)(int));
  if (sync_fails(fd)) { errno = EIO; return -1; }
  return real_fsync(fd);
}

int fdatasync(int fd) {
  NEXT(fdatasync, int (*)(int));
  if (sync_fails(fd)) { errno = EIO; return -1; }
  return real_fdatasync(fd);
}

ssize_t write(int fd, const void* buffer, size_t count) {
  NEXT(write, ssize_t (*)(int, const void*, size_t));
  if (disk_full(fd, count)) { errno = ENOSPC; return -1; }
  return real_write(fd, buffer, count);
}

ssize_t pwrite(int fd, const void* buffer, size_t count, off_t offset) {
  NEXT(pwrite, ssize_t (*)(int, const void*, size_t, off_t));
  if (disk_full(fd, count)) { errno = ENOSPC; return -1; }
  return real_pwrite(fd, buffer, count, offset);
}

ssize_t pwrite64(int fd, const void* buffer, size_t count, off_t offset) {
  NEXT(pwrite64, ssize_t (*)(int, const void*, size_t, off_t));
  if (disk_full(fd, count)) { errno = ENOSPC; return -1; }
  return real_pwrite64(fd, buffer, count, offset);
}

ssize_t writev(int fd, const struct iovec* vectors, int count) {
  NEXT(writev, ssize_t (*)(int, const struct iovec*, int));
  size_t total = 0;
  for (int i = 0; i < count; ++i) total += vectors[i].iov_len;
  if (disk_full(fd, total)) { errno = ENOSPC; return -1; }
  return real_writev(fd, vectors, count);
}

int fallocate(int fd, int mode, off_t offset, off_t length) {
  NEXT(fallocate, int (*)(int, int, off_t, off_t));
  const long long limit = limit_for("full");
  if (limit >= 0 && under_directory(fd) && bytes_written.load() + static_cast<long long>(length) > limit) {
    errno = ENOSPC;
    return -1;
  }
  return real_fallocate(fd, mode, offset, length);
}

// The simulated disk's free space, for the server's own free-space check.
static void report_space(const char* path, struct statvfs* info) {
  const long long limit = limit_for("full");
  const char* directory = fault_directory();
  char resolved[4096];
  if (limit < 0 || !directory || !realpath(path, resolved) || strncmp(resolved, directory, strlen(directory)) != 0) return;
  const long long left = limit - bytes_written.load();
  info->f_bavail = info->f_bfree = left > 0 ? static_cast<fsblkcnt_t>(left) / info->f_frsize : 0;
}

int statvfs(const char* path, struct statvfs* info) {
  NEXT(statvfs, int (*)(const char*, struct statvfs*));
  const int result = real_statvfs(path, info);
  if (result == 0) report_space(path, info);
  return result;
}

int statvfs64(const char* path, struct statvfs64* info) {
  NEXT(statvfs64, int (*)(const char*, struct statvfs64*));
  const int result = real_statvfs64(path, info);
  if (result == 0) report_space(path, reinterpret_cast<struct statvfs*>(info));
  return result;
}

}  // extern "C"

/*
 * enospc_shim.c — a preloadable library (LD_PRELOAD) that makes one store's
 * files behave as if their disk were full, for tests/test_store_full.c.
 *
 * While the file named by SWAPSPEC_FAULT_SWITCH exists, every write-type
 * call on a descriptor whose path starts with SWAPSPEC_FAULT_STORE fails
 * with ENOSPC: write, pwrite, pwrite64, writev, pwritev, pwritev64, and the
 * calls that would give the file more room (ftruncate/ftruncate64 to a
 * larger size, fallocate/fallocate64 other than hole punching,
 * posix_fallocate/posix_fallocate64).  Shrinking a file and every read go
 * through, as they do on a real full disk.  Once the switch file is
 * removed, every call goes through again.  Other files (the daemon's log,
 * sockets, the test's own files) are never touched.
 *
 * The switch file may hold a whole number N (empty or anything else means
 * 0): the first N such calls after this switch file appeared still go
 * through, and only the later ones fail — the disk fills part-way through
 * a commit, leaving a torn append in the WAL.  A new switch file (another
 * inode or modification time) starts a new count.
 *
 * Why every write, and not only the writes that grow a file: SQLite's unix
 * VFS on Linux writes its database, -wal, -journal and -shm files through
 * pwrite64 (strace of `swapspec serve`), and in WAL mode each commit
 * appends frames, so on an ordinary file system only growth would fail.
 * A copy-on-write file system (btrfs, ZFS) or a thin-provisioned volume can
 * refuse an overwrite too; failing every write covers both cases and keeps
 * the outcome independent of where SQLite happens to write (for instance
 * after a WAL reset), which makes the test deterministic.
 *
 * The descriptor's path comes from /proc/self/fd (Linux); the switch is
 * checked with stat() on each matching call, so the test turns the fault on
 * and off from outside the process without signals or timing.  The shim is
 * built without sanitizers (CMakeLists.txt) and allocates nothing.  Owns
 * the pointers to the next definitions of the wrapped functions and the
 * count of calls the current switch still lets through.
 */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/uio.h>
#include <unistd.h>

#define SHIM_PATH_MAX 4096

static char shim_prefix[SHIM_PATH_MAX];
static char shim_switch[SHIM_PATH_MAX];

/* The settings, read once before main (single-threaded then). */
__attribute__((constructor)) static void shim_init(void) {
    const char *p = getenv("SWAPSPEC_FAULT_STORE");
    const char *s = getenv("SWAPSPEC_FAULT_SWITCH");
    if (p == NULL || s == NULL || p[0] != '/' || s[0] != '/' ||
        strlen(p) >= SHIM_PATH_MAX || strlen(s) >= SHIM_PATH_MAX)
        return; /* not configured: every call goes through */
    memcpy(shim_prefix, p, strlen(p) + 1);
    memcpy(shim_switch, s, strlen(s) + 1);
}

/* The next definition of name (libc, or a sanitizer's interceptor placed
 * after this library), looked up on first use and kept in *slot.  Two
 * threads racing here store the same pointer; the atomics make that race
 * well defined. */
static void *shim_next(void **slot, const char *name) {
    void *sym = __atomic_load_n(slot, __ATOMIC_ACQUIRE);
    if (sym == NULL) {
        sym = dlsym(RTLD_NEXT, name);
        __atomic_store_n(slot, sym, __ATOMIC_RELEASE);
    }
    return sym;
}

/* The number at the start of the switch file, or 0. */
static long shim_read_budget(void) {
    char text[32];
    int fd = open(shim_switch, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return 0;
    ssize_t n = read(fd, text, sizeof text - 1);
    close(fd);
    long budget = 0;
    for (ssize_t i = 0; i < n && text[i] >= '0' && text[i] <= '9'; i++)
        if (budget < 1000000000L)
            budget = budget * 10 + (text[i] - '0');
    return budget;
}

static pthread_mutex_t shim_lock = PTHREAD_MUTEX_INITIALIZER;
static struct stat shim_seen; /* the switch file the count belongs to */
static int shim_seen_any;
static long shim_budget; /* calls this switch still lets through */

/* 1 when one more call may go through under the switch file sb describes
 * (and counts it), 0 when the disk is full for it. */
static int shim_spend(const struct stat *sb) {
    pthread_mutex_lock(&shim_lock);
    if (!shim_seen_any || sb->st_dev != shim_seen.st_dev ||
        sb->st_ino != shim_seen.st_ino ||
        sb->st_mtim.tv_sec != shim_seen.st_mtim.tv_sec ||
        sb->st_mtim.tv_nsec != shim_seen.st_mtim.tv_nsec) {
        shim_seen = *sb; /* a new switch: a new count */
        shim_seen_any = 1;
        shim_budget = shim_read_budget();
    }
    int pass = shim_budget > 0;
    if (pass)
        shim_budget--;
    pthread_mutex_unlock(&shim_lock);
    return pass;
}

/* 1 when fd is one of the store's files and the disk is "full" now. */
static int shim_full(int fd) {
    if (shim_prefix[0] == '\0' || fd < 0)
        return 0;
    char link[32] = "/proc/self/fd/";
    char digits[12];
    int n = 0;
    for (int v = fd; n == 0 || v > 0; v /= 10)
        digits[n++] = (char)('0' + v % 10);
    size_t at = strlen(link);
    while (n > 0)
        link[at++] = digits[--n];
    link[at] = '\0';
    char target[SHIM_PATH_MAX];
    ssize_t len = readlink(link, target, sizeof target - 1);
    if (len <= 0)
        return 0;
    target[len] = '\0';
    if (strncmp(target, shim_prefix, strlen(shim_prefix)) != 0)
        return 0;
    struct stat sb;
    return stat(shim_switch, &sb) == 0 && !shim_spend(&sb);
}

/* 1 when the file behind fd is shorter than size (a call would grow it). */
static int shim_grows(int fd, off_t size) {
    struct stat sb;
    return fstat(fd, &sb) == 0 && size > sb.st_size;
}

/* Function-pointer types of the wrapped calls; the dlsym result is copied
 * into them with memcpy (ISO C has no cast from object to function
 * pointer). */
typedef ssize_t (*shim_write_fn)(int, const void *, size_t);
typedef ssize_t (*shim_pwrite_fn)(int, const void *, size_t, off_t);
typedef ssize_t (*shim_pwrite64_fn)(int, const void *, size_t, off64_t);
typedef ssize_t (*shim_writev_fn)(int, const struct iovec *, int);
typedef ssize_t (*shim_pwritev_fn)(int, const struct iovec *, int, off_t);
typedef ssize_t (*shim_pwritev64_fn)(int, const struct iovec *, int, off64_t);
typedef int (*shim_ftruncate_fn)(int, off_t);
typedef int (*shim_ftruncate64_fn)(int, off64_t);
typedef int (*shim_fallocate_fn)(int, int, off_t, off_t);
typedef int (*shim_fallocate64_fn)(int, int, off64_t, off64_t);
typedef int (*shim_posix_fallocate_fn)(int, off_t, off_t);
typedef int (*shim_posix_fallocate64_fn)(int, off64_t, off64_t);

#define SHIM_NEXT(type, var, name, fail)                                       \
    type var;                                                                  \
    do {                                                                       \
        static void *slot_;                                                    \
        void *sym_ = shim_next(&slot_, name);                                  \
        if (sym_ == NULL) {                                                    \
            errno = ENOSYS;                                                    \
            return fail;                                                       \
        }                                                                      \
        memcpy(&var, &sym_, sizeof var);                                       \
    } while (0)

ssize_t write(int fd, const void *buf, size_t count) {
    SHIM_NEXT(shim_write_fn, next, "write", -1);
    if (count > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, buf, count);
}

ssize_t pwrite(int fd, const void *buf, size_t count, off_t offset) {
    SHIM_NEXT(shim_pwrite_fn, next, "pwrite", -1);
    if (count > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, buf, count, offset);
}

ssize_t pwrite64(int fd, const void *buf, size_t count, off64_t offset) {
    SHIM_NEXT(shim_pwrite64_fn, next, "pwrite64", -1);
    if (count > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, buf, count, offset);
}

ssize_t writev(int fd, const struct iovec *iov, int iovcnt) {
    SHIM_NEXT(shim_writev_fn, next, "writev", -1);
    if (iovcnt > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, iov, iovcnt);
}

ssize_t pwritev(int fd, const struct iovec *iov, int iovcnt, off_t offset) {
    SHIM_NEXT(shim_pwritev_fn, next, "pwritev", -1);
    if (iovcnt > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, iov, iovcnt, offset);
}

ssize_t pwritev64(int fd, const struct iovec *iov, int iovcnt, off64_t offset) {
    SHIM_NEXT(shim_pwritev64_fn, next, "pwritev64", -1);
    if (iovcnt > 0 && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, iov, iovcnt, offset);
}

int ftruncate(int fd, off_t length) {
    SHIM_NEXT(shim_ftruncate_fn, next, "ftruncate", -1);
    if (shim_full(fd) && shim_grows(fd, length)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, length);
}

int ftruncate64(int fd, off64_t length) {
    SHIM_NEXT(shim_ftruncate64_fn, next, "ftruncate64", -1);
    if (shim_full(fd) && shim_grows(fd, length)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, length);
}

int fallocate(int fd, int mode, off_t offset, off_t len) {
    SHIM_NEXT(shim_fallocate_fn, next, "fallocate", -1);
    if (!(mode & FALLOC_FL_PUNCH_HOLE) && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, mode, offset, len);
}

int fallocate64(int fd, int mode, off64_t offset, off64_t len) {
    SHIM_NEXT(shim_fallocate64_fn, next, "fallocate64", -1);
    if (!(mode & FALLOC_FL_PUNCH_HOLE) && shim_full(fd)) {
        errno = ENOSPC;
        return -1;
    }
    return next(fd, mode, offset, len);
}

/* posix_fallocate reports its error as the return value, not in errno. */
int posix_fallocate(int fd, off_t offset, off_t len) {
    SHIM_NEXT(shim_posix_fallocate_fn, next, "posix_fallocate", ENOSYS);
    if (shim_full(fd))
        return ENOSPC;
    return next(fd, offset, len);
}

int posix_fallocate64(int fd, off64_t offset, off64_t len) {
    SHIM_NEXT(shim_posix_fallocate64_fn, next, "posix_fallocate64", ENOSYS);
    if (shim_full(fd))
        return ENOSPC;
    return next(fd, offset, len);
}

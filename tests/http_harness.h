/*
 * http_harness.h — test helpers for the service: start `swapspec serve` as
 * a child process on 127.0.0.1 port 0 (the bound port is read from its
 * "listening" log line), send raw HTTP/1.1 requests over a socket, parse
 * status, headers and body, and stop the daemon (SIGTERM, or SIGKILL for
 * crash tests).  Each test gets its own scratch folder.
 */
#ifndef SWAPSPEC_HTTP_HARNESS_H
#define SWAPSPEC_HTTP_HARNESS_H

#include <arpa/inet.h>
#include <criterion/criterion.h>
#include <dirent.h>
#include <fcntl.h>
#include <jansson.h>
#include <netinet/in.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

extern char **environ;

typedef struct {
    pid_t pid;
    int port;
    char dir[64];
    char log[128];
} hh_daemon;

typedef struct {
    int status;
    char headers[4096];
    char *body;
    size_t body_len;
    json_t *json; /* parsed body when it is JSON */
} hh_response;

static inline void hh_tmpdir(char *dir, size_t cap) {
    snprintf(dir, cap, "/tmp/swapspec-http-XXXXXX");
    cr_assert(mkdtemp(dir) != NULL, "mkdtemp failed");
}

static inline void hh_rmdir(const char *dir) {
    DIR *d = opendir(dir);
    if (d == NULL)
        return;
    struct dirent *ent;
    char path[512];
    while ((ent = readdir(d)) != NULL) {
        if (strcmp(ent->d_name, ".") && strcmp(ent->d_name, "..")) {
            snprintf(path, sizeof path, "%s/%s", dir, ent->d_name);
            unlink(path);
        }
    }
    closedir(d);
    rmdir(dir);
}

static inline void hh_write(const char *path, const char *text) {
    FILE *f = fopen(path, "w");
    cr_assert(f != NULL, "cannot write %s", path);
    fputs(text, f);
    fclose(f);
}

/* Starts the daemon with extra arguments (NULL-terminated); waits for the
 * listening line.  Returns 0 and fills d, or the daemon's exit status when
 * it stopped instead (its log is in d->log). */
/* The tokens "r-token", "w-token", "a-token" with roles read, write and
 * admin, written to DIR/tokens (digests by sha256sum, each line with a
 * trailing comment, which the format allows); path in out. */
static inline void hh_tokens(const char *dir, char *out, size_t cap) {
    snprintf(out, cap, "%s/tokens", dir);
    FILE *f = fopen(out, "w");
    cr_assert(f != NULL);
    const char *names[3] = {"r-token", "w-token", "a-token"};
    const char *roles[3] = {"read", "write", "admin"};
    for (int k = 0; k < 3; k++) {
        char cmd[256], hex[80] = "";
        snprintf(cmd, sizeof cmd, "printf %%s %s | sha256sum", names[k]);
        FILE *p = popen(cmd, "r");
        cr_assert(p && fscanf(p, "%64s", hex) == 1);
        pclose(p);
        fprintf(f, "%s %s  # test token\n", roles[k], hex);
    }
    fclose(f);
}

static inline int hh_start(hh_daemon *d, const char *const *extra) {
    char data[128];
    snprintf(data, sizeof data, "%s/store.db", d->dir);
    snprintf(d->log, sizeof d->log, "%s/daemon.log", d->dir);
    const char *argv[32] = {SWAPSPEC_BINARY, "serve", "--data", data};
    int argc = 4;
    int has_listen = 0;
    for (int i = 0; extra && extra[i] && argc < 30; i++) {
        has_listen |= strcmp(extra[i], "--listen") == 0;
        argv[argc++] = extra[i];
    }
    if (!has_listen) {
        argv[argc++] = "--listen";
        argv[argc++] = "127.0.0.1:0";
    }
    argv[argc] = NULL;
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_addopen(&fa, 2, d->log,
                                     O_WRONLY | O_CREAT | O_TRUNC, 0600);
    posix_spawn_file_actions_addopen(&fa, 1, "/dev/null", O_WRONLY, 0);
    int rc = posix_spawn(&d->pid, SWAPSPEC_BINARY, &fa, NULL,
                         (char *const *)argv, environ);
    posix_spawn_file_actions_destroy(&fa);
    cr_assert(rc == 0, "cannot start the daemon");
    d->port = 0;
    for (int t = 0; t < 200; t++) { /* up to 10 s */
        FILE *f = fopen(d->log, "r");
        char line[2048];
        while (f && fgets(line, sizeof line, f)) {
            const char *p = strstr(line, "\"port\":");
            if (strstr(line, "\"listening\"") && p)
                d->port = atoi(p + 7);
        }
        if (f)
            fclose(f);
        if (d->port > 0)
            return 0;
        int status;
        if (waitpid(d->pid, &status, WNOHANG) == d->pid) {
            d->pid = 0;
            return WIFEXITED(status) ? WEXITSTATUS(status) : 128;
        }
        struct timespec nap = {0, 50 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    cr_assert_fail("the daemon did not start listening");
    return -1;
}

/* Stops the daemon with sig; returns its exit status (128+sig if killed).
 * After a clean stop the daemon's log must hold no sanitizer report (the
 * sanitizer build runs the daemon instrumented too). */
static inline int hh_stop(hh_daemon *d, int sig) {
    if (d->pid <= 0)
        return -1;
    kill(d->pid, sig);
    int status = 0;
    waitpid(d->pid, &status, 0);
    d->pid = 0;
    if (sig != SIGKILL) {
        FILE *f = fopen(d->log, "r");
        char line[4096];
        while (f && fgets(line, sizeof line, f))
            cr_expect(strstr(line, "ERROR: LeakSanitizer") == NULL &&
                          strstr(line, "ERROR: AddressSanitizer") == NULL &&
                          strstr(line, "runtime error:") == NULL,
                      "sanitizer report from the daemon: %s", line);
        if (f)
            fclose(f);
    }
    return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

static inline int hh_connect(int port) {
    int fd = socket(AF_INET, SOCK_STREAM, 0);
    struct sockaddr_in a;
    memset(&a, 0, sizeof a);
    a.sin_family = AF_INET;
    a.sin_port = htons((uint16_t)port);
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    cr_assert(connect(fd, (struct sockaddr *)&a, sizeof a) == 0,
              "cannot connect to port %d", port);
    return fd;
}

/* Sends raw bytes and reads the whole response (Connection: close). */
static inline void hh_raw(int port, const char *req, size_t len,
                          hh_response *out) {
    memset(out, 0, sizeof *out);
    int fd = hh_connect(port);
    size_t sent = 0;
    while (sent < len) {
        ssize_t n = send(fd, req + sent, len - sent, MSG_NOSIGNAL);
        if (n <= 0)
            break; /* the server may close early (413) */
        sent += (size_t)n;
    }
    size_t cap = 1 << 16, used = 0;
    char *buf = malloc(cap);
    for (;;) {
        struct pollfd p = {fd, POLLIN, 0};
        if (poll(&p, 1, 30000) <= 0)
            break;
        if (used + 4096 > cap)
            buf = realloc(buf, cap *= 2);
        ssize_t n = recv(fd, buf + used, cap - used - 1, 0);
        if (n <= 0)
            break;
        used += (size_t)n;
    }
    close(fd);
    buf[used] = '\0';
    char *sep = strstr(buf, "\r\n\r\n");
    cr_assert(sep != NULL, "no complete response: '%.200s'", buf);
    sscanf(buf, "HTTP/1.%*d %d", &out->status);
    size_t hlen = (size_t)(sep - buf);
    if (hlen >= sizeof out->headers)
        hlen = sizeof out->headers - 1;
    memcpy(out->headers, buf, hlen);
    out->headers[hlen] = '\0';
    out->body_len = used - (size_t)(sep + 4 - buf);
    out->body = malloc(out->body_len + 1);
    memcpy(out->body, sep + 4, out->body_len);
    out->body[out->body_len] = '\0';
    free(buf);
    json_error_t jerr;
    out->json = json_loadb(out->body, out->body_len, 0, &jerr);
}

/* A request with optional token, content type, extra header lines ("K: v"
 * separated by \r\n, or NULL) and body. */
static inline void hh_request(int port, const char *method, const char *path,
                              const char *token, const char *content_type,
                              const char *extra, const char *body,
                              hh_response *out) {
    size_t blen = body ? strlen(body) : 0;
    size_t cap = blen + (extra ? strlen(extra) : 0) + 4096;
    char *req = malloc(cap);
    int n = snprintf(req, cap,
                     "%s %s HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: "
                     "close\r\n",
                     method, path);
    if (token)
        n += snprintf(req + n, cap - (size_t)n, "Authorization: Bearer %s\r\n",
                      token);
    if (content_type)
        n += snprintf(req + n, cap - (size_t)n, "Content-Type: %s\r\n",
                      content_type);
    if (extra)
        n += snprintf(req + n, cap - (size_t)n, "%s\r\n", extra);
    if (body)
        n +=
            snprintf(req + n, cap - (size_t)n, "Content-Length: %zu\r\n", blen);
    n += snprintf(req + n, cap - (size_t)n, "\r\n");
    if (body) {
        memcpy(req + n, body, blen);
        n += (int)blen;
    }
    hh_raw(port, req, (size_t)n, out);
    free(req);
}

static inline void hh_free(hh_response *r) {
    free(r->body);
    json_decref(r->json);
    memset(r, 0, sizeof *r);
}

/* The value of a response header (case-insensitive name), or NULL. */
static inline const char *hh_header(const hh_response *r, const char *name,
                                    char *out, size_t cap) {
    const char *p = r->headers;
    size_t n = strlen(name);
    while ((p = strstr(p, "\r\n")) != NULL) {
        p += 2;
        if (strncasecmp(p, name, n) == 0 && p[n] == ':') {
            const char *v = p + n + 1;
            while (*v == ' ')
                v++;
            size_t len = strcspn(v, "\r\n");
            if (len >= cap)
                len = cap - 1;
            memcpy(out, v, len);
            out[len] = '\0';
            return out;
        }
    }
    return NULL;
}

#endif /* SWAPSPEC_HTTP_HARNESS_H */

/* Running the department's alert command with a time limit: fork, feed the
 * JSON on a non-blocking pipe, wait with a deadline, stop the whole process
 * group when it runs over. No SQL: the caller records the outcome. */
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "cli/alert.h"

/* After SIGTERM, how long the group gets before SIGKILL. */
#define GRACE_MS 300

static long now_ms(void)
{
    struct timespec ts;

    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (long)ts.tv_sec * 1000L + ts.tv_nsec / 1000000L;
}

static void sleep_ms(int ms)
{
    poll(NULL, 0, ms);
}

/* Keeps what the command writes, up to the size of the buffer (the rest is
 * read and dropped, so a chatty command never blocks on a full pipe). */
typedef struct said_buf {
    char *buf;
    size_t size, len;
    int more;      /* output beyond the buffer was dropped */
} said_buf;

/* Reads what is there on fd (non-blocking) into s; waits up to ms for it. */
static void collect(int fd, said_buf *s, int ms)
{
    char chunk[1024];
    struct pollfd p = {fd, POLLIN, 0};
    ssize_t n;

    if (fd < 0) {
        sleep_ms(ms);
        return;
    }
    if (poll(&p, 1, ms) <= 0)
        return;
    while ((n = read(fd, chunk, sizeof chunk)) > 0) {
        size_t room = s->size > s->len + 1 ? s->size - 1 - s->len : 0, k = (size_t)n;
        if (k > room) {
            k = room;
            s->more = 1;
        }
        if (k) {
            memcpy(s->buf + s->len, chunk, k);
            s->len += k;
            s->buf[s->len] = '\0';
        }
    }
}

/* Writes as much of input as the command takes before the deadline; a
 * command that does not read its input is not waited for here. */
static void feed(int fd, const char *input, long deadline, int out_fd, said_buf *s)
{
    size_t len = input ? strlen(input) : 0, done = 0;

    while (done < len) {
        struct pollfd p = {fd, POLLOUT, 0};
        long left = deadline - now_ms();
        ssize_t w;

        if (left <= 0 || poll(&p, 1, (int)(left > 100 ? 100 : left)) < 0) {
            if (errno == EINTR)
                continue;
            break;
        }
        if (!(p.revents & POLLOUT)) {
            if (p.revents & (POLLERR | POLLHUP))
                break;
            collect(out_fd, s, 0);   /* a command that writes before it reads */
            continue;
        }
        w = write(fd, input + done, len - done);
        if (w < 0) {
            if (errno == EAGAIN || errno == EINTR)
                continue;
            break;  /* EPIPE: the command closed its input */
        }
        done += (size_t)w;
    }
}

void cli_alert_run(fxl_alert_outcome *outcome, int *exit_code, const char *command,
                   const char *input, int timeout_s, char *said, size_t said_size, int *said_more)
{
    struct sigaction ignore, old_pipe;
    int fds[2] = {-1, -1}, outfds[2] = {-1, -1}, status = 0, flags;
    said_buf s = {said, said_size, 0, 0};
    long deadline;
    pid_t pid, w = 0;

    *outcome = FXL_ALERT_NOT_STARTED;
    *exit_code = 0;
    if (said && said_size)
        said[0] = '\0';
    else
        s.size = 0;
    if (said_more)
        *said_more = 0;
    if (timeout_s < 1)
        timeout_s = 1;
    fflush(stdout);
    fflush(stderr);
    if (pipe(fds) != 0)
        return;
    /* The command's output never reaches the terminal as it is: it is
     * captured here and shown by the caller with control characters
     * (escape sequences) replaced (docs/security.md). */
    if (pipe(outfds) != 0) {
        close(fds[0]);
        close(fds[1]);
        return;
    }
    pid = fork();
    if (pid < 0) {
        close(fds[0]);
        close(fds[1]);
        close(outfds[0]);
        close(outfds[1]);
        return;
    }
    if (pid == 0) {
        /* Child: its own process group, so a timeout stops everything it
         * started; stdout and stderr to the capture pipe. */
        setpgid(0, 0);
        dup2(fds[0], STDIN_FILENO);
        dup2(outfds[1], STDOUT_FILENO);
        dup2(outfds[1], STDERR_FILENO);
        close(fds[0]);
        close(fds[1]);
        close(outfds[0]);
        close(outfds[1]);
        execl("/bin/sh", "sh", "-c", command, (char *)NULL);
        _exit(127);
    }
    setpgid(pid, pid);  /* also here, against the race with the child */
    close(fds[0]);
    close(outfds[1]);
    flags = fcntl(outfds[0], F_GETFL);
    if (flags >= 0)
        fcntl(outfds[0], F_SETFL, flags | O_NONBLOCK);

    memset(&ignore, 0, sizeof ignore);
    ignore.sa_handler = SIG_IGN;
    sigemptyset(&ignore.sa_mask);
    sigaction(SIGPIPE, &ignore, &old_pipe);
    flags = fcntl(fds[1], F_GETFL);
    if (flags >= 0)
        fcntl(fds[1], F_SETFL, flags | O_NONBLOCK);
    deadline = now_ms() + (long)timeout_s * 1000L;
    feed(fds[1], input, deadline, outfds[0], &s);
    close(fds[1]);
    sigaction(SIGPIPE, &old_pipe, NULL);

    while ((w = waitpid(pid, &status, WNOHANG)) == 0 && now_ms() < deadline)
        collect(outfds[0], &s, 20);
    if (w == 0) {
        long grace;

        kill(-pid, SIGTERM);
        grace = now_ms() + GRACE_MS;
        while ((w = waitpid(pid, &status, WNOHANG)) == 0 && now_ms() < grace)
            collect(outfds[0], &s, 20);
        kill(-pid, SIGKILL);  /* the rest of the group, even if the shell is gone */
        if (w == 0)
            waitpid(pid, &status, 0);
        collect(outfds[0], &s, 0);
        close(outfds[0]);
        if (said_more)
            *said_more = s.more;
        *outcome = FXL_ALERT_TIMED_OUT;
        return;
    }
    /* What the command wrote before it ended (a child it left running may
     * still hold the pipe: only what is there now is taken). */
    collect(outfds[0], &s, 0);
    close(outfds[0]);
    if (said_more)
        *said_more = s.more;
    if (w < 0) {
        *outcome = FXL_ALERT_FAILED;
        *exit_code = -1;
        return;
    }
    if (WIFEXITED(status)) {
        *exit_code = WEXITSTATUS(status);
        *outcome = *exit_code == 0 ? FXL_ALERT_OK : FXL_ALERT_FAILED;
    } else if (WIFSIGNALED(status)) {
        *exit_code = -WTERMSIG(status);
        *outcome = FXL_ALERT_FAILED;
    } else {
        *outcome = FXL_ALERT_FAILED;
    }
}

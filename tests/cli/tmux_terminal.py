"""A real terminal for the console tests: a private tmux server (its own
socket, no user configuration) whose sessions run one fxledger command each.

No session is killed before the end. Killing a server's last session makes
the server exit, and a session started while it exits fails with "server
exited unexpectedly"; with every session kept until kill_server, the server
lives for the whole test."""
import os
import shutil
import subprocess
import time

TMUX = shutil.which("tmux")


class TmuxTerminal:
    def __init__(self, width, height):
        self.width, self.height = width, height
        self.socket = "fxl%d-%d" % (os.getpid(), id(self))
        self.started = 0
        self.session = None

    def tmux(self, *args, **kw):
        return subprocess.run([TMUX, "-L", self.socket, "-f", "/dev/null"] + list(args), **kw)

    def start(self, shell_command):
        """Runs shell_command in a new detached session; it becomes the current one."""
        self.started += 1
        self.session = "screen%d" % self.started
        self.tmux("new-session", "-d", "-s", self.session, "-x", str(self.width),
                  "-y", str(self.height), shell_command, check=True)

    def screen(self):
        # -J joins lines the terminal wrapped, so an overlong line shows as one
        # line longer than the width; -S - starts at the scrollback's top.
        r = self.tmux("capture-pane", "-p", "-J", "-S", "-", "-t", self.session,
                      capture_output=True, text=True, check=True)
        return r.stdout

    def wait_for(self, text, count=1, timeout=30):
        """The screen once text appears count times on it, or None at the timeout."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            s = self.screen()
            if s.count(text) >= count:
                return s
            time.sleep(0.1)
        return None

    def keys(self, *k):
        self.tmux("send-keys", "-t", self.session, *k, check=True)

    def kill_server(self):
        self.tmux("kill-server", capture_output=True)

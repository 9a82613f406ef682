#!/usr/bin/python3
"""ptyrun - drive the real libserialport through a pseudo-terminal.

libserialport 0.1.1 will not open a pty: it looks the port up in
/sys/class/tty/<name> and sets the modem lines with ioctls a pty refuses.
This module gives a program under test a serial port it can open anyway:

* a private mount namespace (unshare --mount --propagation private) holds
  a private /dev: a tmpfs that mirrors the host's /dev entry by entry (bind
  mounts), except that /dev/ttyS0 is the slave of a pty this process holds
  the master of.  /sys/class/tty/ttyS0 exists on the host, so
  sp_get_port_by_name() is satisfied;
* the program runs with LD_PRELOAD=ptyshim.so (tests/shim/ptyshim.c), which
  answers the modem-line ioctls (TIOCMGET/TIOCMSET/TIOCMBIS/TIOCMBIC) on a
  pty and passes everything else to the kernel.

Nothing in the program changes.  Needs root (mounts and namespaces).

    with PtyDevice() as dev:
        proc = dev.spawn(["build/tidepost", "run", "-c", "x.conf"])
        dev.write(frame_bytes)          # the "station" sends bytes
        reply = dev.read(timeout=1.0)   # what the program sent to the port
        dev.unplug()                    # the adapter is pulled
        dev.replug()                    # and plugged back in

Unplug does what pulling a USB adapter does, as far as a pty can: the
master is closed, so the tty is hung up and every fd the program holds on
it polls POLLHUP/POLLERR and reads 0 bytes (EOF; writes fail with EIO),
and the node /dev/ttyS0 is removed from the private /dev, so a new open()
fails with ENOENT.  The old fd never comes back to life (nor does it on
real hardware); replug() makes a new pty and puts its slave at the same
path, so the program's next open succeeds.  libserialport 0.1.1's
sp_blocking_read() reports a hung-up port as "0 bytes, timeout" and spins,
so a program must poll its handle and treat POLLHUP or a 0-byte read after
POLLIN as "device lost".

The namespace is kept by a small keeper process (this file run with
--keeper) that lives until close(); spawn() enters it with nsenter, so
several programs (or one restarted many times) see the same device, and the
pid Popen returns is the program's own (nsenter execs without forking for
a mount namespace).

Command line: ptyrun.py [--feed FILE] [--delay-ms N] [--sent FILE]
[--shim SO] -- CMD ARGS...  runs CMD with the device, writes FILE's bytes
into the port after N ms (default 300), saves what CMD sent to the port in
--sent FILE, and exits with CMD's status.
"""

import ctypes
import errno
import os
import select
import shutil
import subprocess
import sys
import tempfile
import threading
import time
import tty

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
SHIM_SRC = os.path.join(ROOT, "tests", "shim", "ptyshim.c")

MS_BIND = 4096
MS_REC = 16384
MNT_DETACH = 2


class PtyUnavailable(Exception):
    """The machine cannot host a PtyDevice (not root, no unshare, ...)."""


def build_dir():
    """The build folder: dirname of $TIDEPOST if set, else ROOT/build."""
    exe = os.environ.get("TIDEPOST")
    if exe:
        return os.path.dirname(os.path.abspath(exe))
    return os.path.join(ROOT, "build")


def ensure_shim(build=None):
    """Path of BUILD/shim/ptyshim.so, compiled here if missing or stale.

    The Makefile builds it too; this keeps the harness usable on its own.
    """
    out = os.path.join(build or build_dir(), "shim", "ptyshim.so")
    if (os.path.exists(out)
            and os.path.getmtime(out) >= os.path.getmtime(SHIM_SRC)):
        return out
    os.makedirs(os.path.dirname(out), exist_ok=True)
    cc = os.environ.get("CC", "cc")
    tmp = out + ".tmp"
    res = subprocess.run([cc, "-shared", "-fPIC", "-o", tmp, SHIM_SRC,
                          "-ldl"], capture_output=True, text=True)
    if res.returncode != 0:
        raise PtyUnavailable("ptyrun: cannot build %s: %s"
                             % (out, res.stderr.strip()))
    os.replace(tmp, out)
    return out


# ---------------------------------------------------------------------------
# Keeper: runs inside the new mount namespace, owns the private /dev.

def _libc():
    return ctypes.CDLL(None, use_errno=True)


def _mount(libc, src, dst, fstype, flags, data=None):
    rc = libc.mount(src.encode() if src else None, dst.encode(),
                    fstype.encode() if fstype else None,
                    ctypes.c_ulong(flags), data.encode() if data else None)
    if rc != 0:
        e = ctypes.get_errno()
        raise OSError(e, "mount %s on %s: %s" % (src, dst, os.strerror(e)))


def _umount(libc, dst):
    if libc.umount2(dst.encode(), MNT_DETACH) != 0:
        e = ctypes.get_errno()
        raise OSError(e, "umount %s: %s" % (dst, os.strerror(e)))


def _mirror_dev(libc, stash, skip):
    """Fills the (empty, tmpfs) /dev with binds of the host entries."""
    for ent in os.scandir(stash):
        if ent.name == skip:
            continue
        dst = os.path.join("/dev", ent.name)
        if ent.is_symlink():
            os.symlink(os.readlink(ent.path), dst)
        elif ent.is_dir(follow_symlinks=False):
            os.mkdir(dst, 0o755)
            _mount(libc, ent.path, dst, None, MS_BIND | MS_REC)
        else:
            os.close(os.open(dst, os.O_CREAT | os.O_WRONLY, 0o600))
            _mount(libc, ent.path, dst, None, MS_BIND)


def _keeper_cmd(libc, line, node):
    words = line.split()
    if words[:1] == ["plug"] and len(words) == 2:
        if not os.path.exists(node):
            os.close(os.open(node, os.O_CREAT | os.O_WRONLY, 0o600))
        _mount(libc, words[1], node, None, MS_BIND)
    elif words == ["unplug"]:
        if os.path.ismount(node):
            _umount(libc, node)
        if os.path.exists(node):
            os.unlink(node)
    else:
        raise ValueError("unknown keeper command: %r" % line)


def keeper_main(stash, node):
    """Builds the private /dev, then serves plug/unplug until stdin ends."""
    libc = _libc()
    try:
        _mount(libc, "/dev", stash, None, MS_BIND | MS_REC)
        _mount(libc, "tpdev", "/dev", "tmpfs", 0, "mode=755,size=1m")
        _mirror_dev(libc, stash, os.path.basename(node))
        _umount(libc, stash)
        print("ready", flush=True)
    except OSError as e:
        print("err %s" % e, flush=True)
        return 1
    for line in sys.stdin:
        try:
            _keeper_cmd(libc, line.strip(), node)
            print("ok", flush=True)
        except (OSError, ValueError) as e:
            print("err %s" % e, flush=True)
    return 0


# ---------------------------------------------------------------------------
# Harness side.

class PtyDevice:
    """A pty standing in for a serial port at `path` (default /dev/ttyS0).

    master: the fd this side reads and writes (None while unplugged).
    slave_name: host path of the current pty slave (/dev/pts/N).
    plugs: how many times a device was plugged (1 after start()).
    """

    def __init__(self, path="/dev/ttyS0", shim=None):
        if os.path.dirname(path) != "/dev":
            raise ValueError("ptyrun: device must be directly in /dev")
        name = os.path.basename(path)
        if not os.path.exists(os.path.join("/sys/class/tty", name)):
            raise PtyUnavailable("ptyrun: /sys/class/tty/%s is missing; "
                                 "libserialport would refuse %s"
                                 % (name, path))
        self.path = path
        self.shim = shim
        self.master = None
        self.slave_name = None
        self.plugs = 0
        self._slave = None
        self._keeper = None
        self._tmp = None
        self._procs = []
        self._lock = threading.Lock()

    # -- lifetime ----------------------------------------------------------
    def __enter__(self):
        self.start()
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def start(self):
        if os.geteuid() != 0:
            raise PtyUnavailable("ptyrun: needs root (mount namespace)")
        for tool in ("unshare", "nsenter"):
            if shutil.which(tool) is None:
                raise PtyUnavailable("ptyrun: %s not found" % tool)
        if self.shim is None:
            self.shim = ensure_shim()
        self._tmp = tempfile.mkdtemp(prefix="ptyrun-")
        stash = os.path.join(self._tmp, "hostdev")
        os.mkdir(stash)
        self._keeper = subprocess.Popen(
            ["unshare", "--mount", "--propagation", "private", "--",
             sys.executable, os.path.abspath(__file__), "--keeper", stash,
             self.path],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True,
            close_fds=True)
        ready = self._keeper.stdout.readline().strip()
        if ready != "ready":
            self.close()
            raise PtyUnavailable("ptyrun: namespace setup failed: %s"
                                 % (ready or "keeper died"))
        self.replug()

    def close(self):
        """Stops leftover spawned programs, the keeper, and the pty."""
        for proc in self._procs:
            if proc.poll() is None:
                proc.terminate()
                try:
                    proc.wait(2)
                except subprocess.TimeoutExpired:
                    proc.kill()
                    proc.wait()
        self._procs = []
        self._close_pty()
        if self._keeper is not None:
            self._keeper.stdin.close()
            try:
                self._keeper.wait(5)
            except subprocess.TimeoutExpired:
                self._keeper.kill()
                self._keeper.wait()
            self._keeper.stdout.close()
            self._keeper = None
        if self._tmp is not None:
            shutil.rmtree(self._tmp, ignore_errors=True)
            self._tmp = None

    # -- the device --------------------------------------------------------
    def _ask(self, line):
        with self._lock:
            self._keeper.stdin.write(line + "\n")
            self._keeper.stdin.flush()
            reply = self._keeper.stdout.readline().strip()
        if reply != "ok":
            raise OSError("ptyrun: keeper: %s: %s"
                          % (line, reply or "keeper died"))

    def _close_pty(self):
        for fd in (self.master, self._slave):
            if fd is not None:
                os.close(fd)
        self.master = self._slave = None

    def unplug(self):
        """Removes the node, then hangs up the tty (closes the master).

        In that order, so a program that reopens as soon as it sees the
        hangup gets ENOENT, never the dying pty's EIO.
        """
        try:
            self._ask("unplug")
        finally:
            self._close_pty()

    def replug(self):
        """Puts a fresh pty's slave at self.path (unplugging first)."""
        if self.master is not None:
            self.unplug()
        master, slave = os.openpty()
        # Raw from the start, so bytes written before the program sets its
        # own termios are neither echoed nor line-edited.
        tty.setraw(slave)
        self.master, self._slave = master, slave
        self.slave_name = os.ttyname(slave)
        self._ask("plug " + self.slave_name)
        self.plugs += 1

    @property
    def plugged(self):
        return self.master is not None

    # -- programs ----------------------------------------------------------
    def env(self, base=None, preload=True):
        """Environment for a program: base (or os.environ) + LD_PRELOAD.

        preload=False leaves the shim out (to show sp_open then fails).
        A sanitized program would refuse to start with a library preloaded
        ahead of its runtime, so ASan's link-order check is turned off.
        """
        env = dict(os.environ if base is None else base)
        old = env.get("LD_PRELOAD")
        if preload:
            env["LD_PRELOAD"] = self.shim + (" " + old if old else "")
            asan = env.get("ASAN_OPTIONS")
            env["ASAN_OPTIONS"] = (asan + ":" if asan else "") + \
                "verify_asan_link_order=0"
        return env

    def command(self, argv, cwd=None):
        """argv wrapped so it runs inside the namespace, in cwd.

        Entering a mount namespace resets the working directory to its
        root, so nsenter is told the directory to use (default: ours).
        """
        cwd = os.path.abspath(cwd or os.getcwd())
        return ["nsenter", "--target", str(self._keeper.pid), "--mount",
                "--wd=" + cwd, "--"] + list(argv)

    def spawn(self, argv, env=None, preload=True, **popen_kw):
        """Popen of argv inside the namespace, with the shim preloaded.

        Popen keywords pass through (stdout=subprocess.PIPE, ...).  The
        returned pid is the program's.  close() stops it if still running.
        """
        popen_kw.setdefault("close_fds", True)
        proc = subprocess.Popen(self.command(argv, popen_kw.get("cwd")),
                                env=self.env(env, preload), **popen_kw)
        self._procs.append(proc)
        return proc

    def run(self, argv, timeout=30, env=None, preload=True, **run_kw):
        """subprocess.run of argv inside the namespace (shim preloaded)."""
        run_kw.setdefault("close_fds", True)
        return subprocess.run(self.command(argv, run_kw.get("cwd")),
                              env=self.env(env, preload), timeout=timeout,
                              **run_kw)

    # -- bytes -------------------------------------------------------------
    def write(self, data, timeout=5.0, baud=None):
        """Writes data into the port (the program reads it).

        baud paces the bytes as a UART would (10 bit times per byte, 8N1);
        None writes as fast as the pty takes them.  Raises TimeoutError
        when the program does not drain the pty within timeout.
        """
        if self.master is None:
            raise OSError(errno.ENODEV, "ptyrun: device is unplugged")
        view = memoryview(bytes(data))
        end = time.monotonic() + timeout
        chunk = 4096 if baud is None else max(1, baud // 1000)
        while view:
            left = end - time.monotonic()
            if left <= 0:
                raise TimeoutError("ptyrun: write: %d bytes not taken"
                                   % len(view))
            _, ready, _ = select.select([], [self.master], [], left)
            if not ready:
                continue
            n = os.write(self.master, view[:chunk])
            view = view[n:]
            if baud is not None:
                time.sleep(n * 10.0 / baud)

    def read(self, n=4096, timeout=1.0):
        """Up to n bytes the program sent; b"" after timeout."""
        if self.master is None:
            raise OSError(errno.ENODEV, "ptyrun: device is unplugged")
        ready, _, _ = select.select([self.master], [], [], timeout)
        if not ready:
            return b""
        try:
            return os.read(self.master, n)
        except OSError as e:
            if e.errno == errno.EIO:    # no one holds the slave open
                return b""
            raise

    def read_exactly(self, n, timeout=5.0):
        """Exactly n bytes, or fewer if timeout ends first."""
        out = b""
        end = time.monotonic() + timeout
        while len(out) < n:
            left = end - time.monotonic()
            if left <= 0:
                break
            out += self.read(n - len(out), left)
        return out


def _cli(argv):
    import argparse
    ap = argparse.ArgumentParser(
        prog="ptyrun.py",
        description="Run CMD with a pty standing in for /dev/ttyS0.")
    ap.add_argument("--feed", help="file whose bytes are written in")
    ap.add_argument("--delay-ms", type=int, default=300,
                    help="wait before feeding (default 300)")
    ap.add_argument("--sent", help="file to save what CMD sent")
    ap.add_argument("--shim", help="ptyshim.so to preload")
    ap.add_argument("--device", default="/dev/ttyS0")
    ap.add_argument("cmd", nargs="+")
    args = ap.parse_args(argv)
    with PtyDevice(args.device, args.shim) as dev:
        proc = dev.spawn(args.cmd)
        if args.feed:
            time.sleep(args.delay_ms / 1000.0)
            with open(args.feed, "rb") as f:
                dev.write(f.read())
        sent = b""
        while proc.poll() is None:
            sent += dev.read(timeout=0.1)
        sent += dev.read(timeout=0.05)
        if args.sent:
            with open(args.sent, "wb") as f:
                f.write(sent)
        return proc.returncode


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "--keeper":
        sys.exit(keeper_main(sys.argv[2], sys.argv[3]))
    try:
        sys.exit(_cli(sys.argv[1:]))
    except PtyUnavailable as e:
        print(e, file=sys.stderr)
        sys.exit(2)

#!/usr/bin/python3
"""Run one command and print its wall time, peak RSS and exit status.

Usage: timeit.py [--stdout FILE] [--stderr FILE] -- CMD [ARGS...]
Prints one line: "<wall s> <peak RSS KiB> <exit status> <ru_maxrss KiB>".
stdout/stderr of CMD go to /dev/null unless a file is given.

Peak RSS is the child's VmHWM from /proc/PID/status, polled every 2 ms
while it runs: that counts only the command's own image.  ru_maxrss from
os.wait4 is printed too but is only an upper bound: Linux folds the
forking process's RSS high-water mark (this Python, ~10 MB) into the
child's maxrss at exec (exec_mmap -> setmax_mm_hiwater_rss), so even
`cat` would show ~10 MB there.  (When CMD is itself this Python binary
the pre-exec image cannot be told apart, so its VmHWM is an upper bound.)
"""

import os
import shutil
import subprocess
import sys
import time


def vmhwm_kib(pid):
    try:
        with open("/proc/%d/status" % pid) as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return 0


def main():
    argv = sys.argv[1:]
    files = {"--stdout": os.devnull, "--stderr": os.devnull}
    while argv and argv[0] in files:
        files[argv[0]] = argv[1]
        argv = argv[2:]
    if argv and argv[0] == "--":
        argv = argv[1:]
    if not argv:
        sys.exit("usage: timeit.py [--stdout F] [--stderr F] -- CMD ...")
    found = shutil.which(argv[0])
    exe = os.path.realpath(found) if found else None
    hwm = 0
    with open(files["--stdout"], "wb") as out, \
            open(files["--stderr"], "wb") as err:
        t0 = time.perf_counter()
        p = subprocess.Popen(argv, stdout=out, stderr=err)
        while True:
            pid, status, ru = os.wait4(p.pid, os.WNOHANG)
            if pid:
                break
            # count only after exec (the pre-exec image is this Python)
            try:  # the child may exit between wait4 and these reads
                if exe is None or os.path.realpath(
                        "/proc/%d/exe" % p.pid) == exe:
                    hwm = max(hwm, vmhwm_kib(p.pid))
            except OSError:
                pass
            time.sleep(0.002)
        wall = time.perf_counter() - t0
    p.returncode = os.waitstatus_to_exitcode(status)
    print("%.4f %d %d %d" % (wall, hwm, p.returncode, ru.ru_maxrss))


if __name__ == "__main__":
    main()

#!/usr/bin/python3
"""Reference test: libtidepost's seawater science against TEOS-10 GSW.

Runs build/tools/sci_eval (tests/tools/sci_eval.c) on random points and
compares with Debian's python3-gsw (run this with /usr/bin/python3).
TIDEPOST is the path of build/tidepost; its folder holds tools/sci_eval.

Comparisons and the conventions that make them meaningful:
  * SP_from_C: gsw.SP_from_C(C, t, p) vs ours, |dSP| <= 1e-6, over the
    PSS-78 range (SP 2..42, t -2..35 degC ITS-90, p 0..10000 dbar) and the
    Hill region (SP 0..2).  C is generated with gsw.C_from_SP.  Both
    convert t68 = 1.00024 t90 internally.  Where the Hill formula goes
    negative (C of a few uS/cm) gsw returns NaN and we must return an error.
  * C_from_SP: gsw.C_from_SP vs our inverse, |dC| <= 1e-6 mS/cm.
  * O2 solubility: gsw.O2sol_SP_pt(SP, pt) vs ours at sea pressure 0, where
    potential temperature = in-situ temperature, so the comparison tests
    the Garcia & Gordon (1992) equation and the ITS-90 -> IPTS-68 step
    (both apply pt68 = 1.00024 pt).  Relative tolerance 1e-9.
  * Density at p = 0: our EOS-80 one-atmosphere density vs TEOS-10
    gsw.rho(SR, CT, 0) with SR = reference salinity (no composition
    anomaly).  The two equations of state differ by design; tolerance
    0.02 kg/m3 (2e-5 relative), enough to show the O2 unit conversion
    uses a correct density.
  * Depth: our UNESCO 1983 depth vs -gsw.z_from_p (TEOS-10 with zero
    dynamic height); relative tolerance 2e-4 (the methods differ by ~1 m
    at 10000 dbar).
Points come from a fixed seed, printed.  Prints "N passed, M failed".
"""
import math
import os
import random
import subprocess
import sys

import gsw

SEED = 19780101
N_SP = 1200
N_HILL = 300
N_O2 = 1000
N_RHO = 300
N_DEPTH = 200


def tool_path():
    tidepost = os.environ.get("TIDEPOST", "build/tidepost")
    return os.path.join(os.path.dirname(os.path.abspath(tidepost)),
                        "tools", "sci_eval")


def make_cases(rng):
    """List of (request line, reference value, tolerance, kind, relative)."""
    cases = []
    for i in range(N_SP + N_HILL):
        sp = rng.uniform(2.0, 41.99) if i < N_SP else rng.uniform(0.0, 2.0)
        t = rng.uniform(-2.0, 35.0)
        # half coastal (0..100 dbar), half the full pressure range
        p = rng.uniform(0.0, 100.0) if i % 2 else rng.uniform(0.0, 10000.0)
        c = float(gsw.C_from_SP(sp, t, p))
        cases.append((f"sp {c!r} {t!r} {p!r}",
                      float(gsw.SP_from_C(c, t, p)), 1e-6, "SP_from_C", False))
        cases.append((f"c {sp!r} {t!r} {p!r}", c, 1e-6, "C_from_SP", False))
    # the dilute end where Hill turns negative: gsw NaN, ours an error
    for c in (1e-6, 1e-5, 1e-4):
        assert math.isnan(gsw.SP_from_C(c, 20.0, 0.0))
        cases.append((f"sp {c!r} 20 0", None, 0.0, "SP_from_C dilute", False))
    for _ in range(N_O2):
        sp = rng.uniform(0.0, 42.0)
        t_min = max(-2.0, float(gsw.t_freezing(sp, 0.0, 1.0)))
        t = rng.uniform(t_min + 1e-3, 40.0)
        cases.append((f"o2sol {sp!r} {t!r}", float(gsw.O2sol_SP_pt(sp, t)),
                      1e-9, "O2sol", True))
    for _ in range(N_RHO):
        sp = rng.uniform(0.0, 42.0)
        t = rng.uniform(max(-2.0, float(gsw.t_freezing(sp, 0.0, 1.0))), 40.0)
        sr = float(gsw.SR_from_SP(sp))
        rho = float(gsw.rho(sr, gsw.CT_from_t(sr, t, 0.0), 0.0))
        cases.append((f"rho {sp!r} {t!r}", rho, 0.02, "rho0", False))
    for _ in range(N_DEPTH):
        p = rng.uniform(0.0, 10000.0)
        lat = rng.uniform(-90.0, 90.0)
        cases.append((f"depth {p!r} {lat!r}", -float(gsw.z_from_p(p, lat)),
                      2e-4, "depth", True))
    return cases


def check(case, answer):
    """Return None if the answer matches, else a message."""
    line, ref, tol, kind, relative = case
    words = answer.split()
    if ref is None:
        return None if words[:1] == ["err"] else f"expected an error: {answer}"
    if len(words) != 3 or words[0] != "ok":
        return f"bad answer {answer!r}"
    if words[2] != "1":
        return f"reported outside validity: {answer}"
    got = float(words[1])
    err = abs(got - ref) / (abs(ref) if relative and ref else 1.0)
    if not err <= tol:
        return f"got {got!r}, gsw {ref!r}, error {err:.3g} > {tol:g}"
    return None


def main():
    tool = tool_path()
    if not os.access(tool, os.X_OK):
        print(f"test_gsw_reference: {tool}: not built", file=sys.stderr)
        return 1
    print(f"test_gsw_reference: seed {SEED}, gsw {gsw.__version__}")
    cases = make_cases(random.Random(SEED))
    req = "".join(c[0] + "\n" for c in cases)
    run = subprocess.run([tool], input=req, capture_output=True, text=True,
                         timeout=60, check=False)
    answers = run.stdout.splitlines()
    if run.returncode != 0 or len(answers) != len(cases):
        print(f"test_gsw_reference: sci_eval exit {run.returncode}, "
              f"{len(answers)} answers for {len(cases)} requests: "
              f"{run.stderr.strip()}", file=sys.stderr)
        return 1
    passed = failed = 0
    worst = {}
    for case, answer in zip(cases, answers):
        msg = check(case, answer)
        if msg is None:
            passed += 1
        else:
            failed += 1
            if failed <= 10:
                print(f"FAIL {case[3]}: {case[0]}: {msg}", file=sys.stderr)
        if case[1] is not None and answer.startswith("ok "):
            got = float(answer.split()[1])
            err = abs(got - case[1])
            if case[4] and case[1]:
                err /= abs(case[1])
            worst[case[3]] = max(worst.get(case[3], 0.0), err)
    for kind, err in sorted(worst.items()):
        print(f"  {kind}: worst difference {err:.3g}")
    print(f"{passed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())

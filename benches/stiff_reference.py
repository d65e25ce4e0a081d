#!/usr/bin/env python3
"""Lamina's square-law ring against a general-purpose stiff ODE integrator.

Development-only comparison (issue 14, part 5); not part of the Rust build or of CI. It needs
Python 3 with numpy and scipy (see benches/README.md) and Lamina's release binary.

The circuit is the N-stage ring of `lamina ring --builtin square-ring` (identical to
`netlists/reference/square-ring-101.lam` for N = 101), as `src/builtin.rs` builds it:

* stage i is an inverter from node i-1 (node N-1 for i = 0) to node i: a square-law n-FET
  (drain = out[i], gate = out[i-1], source = ground) and a p-FET (drain = out[i],
  gate = out[i-1], source = vdd), k = 100 uA/V^2 each, V_T = +0.3 V and -0.3 V, no
  channel-length modulation, no intrinsic gate charge;
* 1 fF from every stage output to ground, an ideal 1 V supply.

With no device charge the system is a plain ODE in the N stage outputs,

    C dV_i/dt = -I_n(V_i, V_{i-1}, 0) - I_p(V_i, V_{i-1}, V_DD),

where I is the current flowing from the node into a device's drain, written exactly as in
`crates/devices/src/square_law.rs`: for an n device, with drain and source ordered by
potential (hi, lo), ov = V_G - V_lo - V_T and v = V_hi - V_lo,

    f = 0 (ov <= 0),  ov v - v^2/2 (v < ov),  ov^2/2 (v >= ov),   I_hi->lo = k f (1 + lambda v),

and a p device is the mirror image I_p(V) = -I_n(-V) with V_T(n) = -V_T(p).

The start is Lamina's single-edge state (`src/ring.rs`): V_i = V_DD for even i, 0 for odd i
(the clamped DC solve that Lamina starts from has no other unknowns to settle here). The
frequency is measured as Lamina measures it: rising crossings of V_DD/2 by out[0], the same
start-up periods discarded and the same periods averaged as Lamina's run reports, the
frequency being (number of periods) / (time from first to last used crossing). scipy's
crossings are located on its dense output (root of the interpolant), Lamina's by a cubic
through the four samples around each crossing.

scipy's BDF (variable order 1-5, quasi-constant step, numerical differentiation formulas) gets
the analytic Jacobian as a sparse matrix (two entries per row: dV_i' / dV_i and
dV_i' / dV_{i-1}). The converged frequency is scipy's at rtol 1e-9; Lamina's `--reference`
setting is shown against it as the cross-check that both integrate the same equations.
"""

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.sparse import csc_matrix

# The built-in stage (src/builtin.rs, SquareStage::default).
K_N = 100e-6  # A/V^2
K_P = 100e-6  # A/V^2
VT_N = 0.3  # V
VT_P = -0.3  # V
VDD = 1.0  # V
LOAD = 1e-15  # F
LAMBDA = 0.0  # 1/V

REPO = Path(__file__).resolve().parent.parent
# Runs longer than this (s) are timed once.
LONG_RUN_S = 10.0
# Largest relative difference between Lamina's --reference frequency and scipy's converged one.
AGREEMENT = 1e-5


def channel(v_hi, v_g, v_lo, k, vt, lam):
    """n-type current from the high to the low channel end and its derivatives.

    Returns (i, d_hi, d_g, d_lo) as in `SquareLawFet::channel`.
    """
    ov = v_g - v_lo - vt
    v = v_hi - v_lo
    on = ov > 0.0
    lin = v < ov
    f = np.where(on, np.where(lin, ov * v - 0.5 * v * v, 0.5 * ov * ov), 0.0)
    f_ov = np.where(on, np.where(lin, v, ov), 0.0)
    f_v = np.where(on & lin, ov - v, 0.0)
    m = 1.0 + lam * v
    d_g = k * f_ov * m
    d_v = k * (f_v * m + f * lam)
    return k * f * m, d_v, d_g, -d_g - d_v


def drain_current(vd, vg, vs, k, vt, lam):
    """n-type current into the drain and its derivatives with respect to (vd, vg).

    The device is symmetric: for vd < vs drain and source exchange roles.
    """
    fwd = vd >= vs
    hi = np.where(fwd, vd, vs)
    lo = np.where(fwd, vs, vd)
    i, d_hi, d_g, d_lo = channel(hi, vg, lo, k, vt, lam)
    sign = np.where(fwd, 1.0, -1.0)
    d_d = np.where(fwd, d_hi, -d_lo)
    return sign * i, d_d, sign * d_g


class Ring:
    """The ring's right-hand side and its sparse analytic Jacobian."""

    def __init__(self, stages):
        self.n = stages
        self.prev = np.roll(np.arange(stages), 1)  # input of stage i is node i-1
        # Fixed CSC pattern: column j holds d(V_j')/dV_j and d(V_{j+1})'/dV_j.
        rows = np.empty(2 * stages, dtype=np.int64)
        cols = np.repeat(np.arange(stages), 2)
        rows[0::2] = np.arange(stages)
        rows[1::2] = (np.arange(stages) + 1) % stages
        # Sort the two rows of each column (column N-1 feeds row 0).
        order = np.lexsort((rows, cols))
        self.rows, self.cols = rows[order], cols[order]
        self.diag_slot = np.empty(stages, dtype=np.int64)
        self.off_slot = np.empty(stages, dtype=np.int64)
        for s, (r, c) in enumerate(zip(self.rows, self.cols)):
            if r == c:
                self.diag_slot[r] = s
            else:
                self.off_slot[r] = s  # entry (r, r-1)
        self.indptr = np.arange(0, 2 * stages + 1, 2)

    def currents(self, v):
        vin = v[self.prev]
        i_n, dn_d, dn_g = drain_current(v, vin, 0.0, K_N, VT_N, LAMBDA)
        # p device: I_p(V) = -I_n(-V), derivatives keep their sign.
        i_pm, dp_d, dp_g = drain_current(-v, -vin, -VDD, K_P, -VT_P, LAMBDA)
        return i_n - i_pm, dn_d + dp_d, dn_g + dp_g

    def rhs(self, _t, v):
        i, _, _ = self.currents(v)
        return -i / LOAD

    def jac(self, _t, v):
        _, d_d, d_g = self.currents(v)
        data = np.empty(2 * self.n)
        data[self.diag_slot] = -d_d / LOAD
        data[self.off_slot] = -d_g / LOAD
        return csc_matrix((data, self.rows, self.indptr), shape=(self.n, self.n))

    def start(self):
        return np.where(np.arange(self.n) % 2 == 0, VDD, 0.0)


def check_jacobian(ring):
    """The analytic Jacobian against central differences at random states (aborts if off)."""
    rng = np.random.default_rng(1)
    h = 1e-7
    for _ in range(5):
        v = rng.uniform(-0.1, VDD + 0.1, ring.n)
        jac = ring.jac(0.0, v).toarray()
        num = np.empty_like(jac)
        for j in range(ring.n):
            e = np.zeros(ring.n)
            e[j] = h
            num[:, j] = (ring.rhs(0.0, v + e) - ring.rhs(0.0, v - e)) / (2 * h)
        scale = np.abs(num).max()
        if np.abs(jac - num).max() > 1e-5 * scale:
            sys.exit("the analytic Jacobian disagrees with central differences")


def period_from_crossings(c, discard, used):
    """Mean period over `used` periods after `discard` start-up periods (as src/ring.rs)."""
    if len(c) < discard + used + 1:
        raise RuntimeError(f"only {len(c)} crossings, need {discard + used + 1}")
    return (c[discard + used] - c[discard]) / used


def run_scipy(stages, rtol, atol, discard, used):
    """One BDF run to the last needed crossing; returns (result, wall seconds)."""
    ring = Ring(stages)
    level = 0.5 * VDD

    def rising(_t, v):
        return v[0] - level

    rising.direction = 1.0
    rising.terminal = discard + used + 1
    t_end = 1e-3  # Lamina's RingParams::time_limit; the terminal event stops far earlier
    t0 = time.perf_counter()
    sol = solve_ivp(
        ring.rhs,
        (0.0, t_end),
        ring.start(),
        method="BDF",
        rtol=rtol,
        atol=atol,
        jac=ring.jac,
        events=rising,
    )
    seconds = time.perf_counter() - t0
    if sol.status < 0:
        raise RuntimeError(f"scipy BDF failed: {sol.message}")
    c = sol.t_events[0]
    period = period_from_crossings(c, discard, used)
    result = {
        "frequency_hz": 1.0 / period,
        "steps": len(sol.t) - 1,
        "rhs_evaluations": sol.nfev,
        "jacobians": sol.njev,
        "factorisations": sol.nlu,
        "simulated_s": sol.t[-1],
    }
    return result, seconds


def run_lamina(binary, stages, reference, integrator="trapezoidal", latency="on"):
    """One Lamina ring run; returns (report, wall seconds)."""
    cmd = [str(binary), "ring", "--builtin", "square-ring", "--stages", str(stages), "--json"]
    cmd += ["--integrator", integrator]
    if not reference:
        cmd += ["--latency", latency]
    if reference:
        cmd.append("--reference")
    t0 = time.perf_counter()
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    seconds = time.perf_counter() - t0
    return json.loads(out), seconds


def best_of(repeat, fn):
    """(result of the first run, least wall time over up to `repeat` runs).

    A run longer than LONG_RUN_S is not repeated: its timing noise is small beside it.
    """
    first, best = None, float("inf")
    for _ in range(max(repeat, 1)):
        result, seconds = fn()
        first = result if first is None else first
        best = min(best, seconds)
        if seconds > LONG_RUN_S:
            break
    return first, best


def progress(text):
    print(text, file=sys.stderr, flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--stages", type=int, default=101, help="odd ring length (default 101)")
    ap.add_argument(
        "--lamina",
        type=Path,
        default=REPO / "target" / "release" / "lamina",
        help="Lamina binary (default target/release/lamina)",
    )
    ap.add_argument(
        "--repeat",
        type=int,
        default=3,
        help=f"timed repetitions, best kept (runs over {LONG_RUN_S:.0f} s are timed once)",
    )
    ap.add_argument(
        "--rtols",
        default="1e-3,3e-4,1e-4,1e-5,1e-6,1e-7",
        help="scipy rtols timed besides the converged run (comma-separated)",
    )
    ap.add_argument(
        "--atol-ratio",
        type=float,
        default=1e-2,
        help="atol = this * rtol * V_DD (default 1e-2: 1e-6 V at rtol 1e-4)",
    )
    ap.add_argument(
        "--converged-rtol",
        type=float,
        default=1e-9,
        help="rtol of the scipy run taken as the converged frequency (default 1e-9)",
    )
    ap.add_argument(
        "--integrator",
        default="trapezoidal",
        help="Lamina's integration formula for the default run (`lamina ring --integrator`; "
        "default trapezoidal; the --reference run stays trapezoidal)",
    )
    ap.add_argument(
        "--latency",
        choices=["on", "off"],
        default="on",
        help="latency in Lamina's default run (`lamina ring --latency`; default on, as "
        "`lamina ring`'s own default)",
    )
    ap.add_argument(
        "--skip-lamina-reference",
        action="store_true",
        help="do not run Lamina's --reference setting (about 20 s on 101 stages)",
    )
    a = ap.parse_args()
    if a.stages < 3 or a.stages % 2 == 0:
        sys.exit("--stages must be odd and at least 3")
    if not a.lamina.is_file():
        sys.exit(f"{a.lamina} not found: build it with `cargo build --release`")
    rtols = [float(t) for t in a.rtols.split(",") if t.strip()]
    check_jacobian(Ring(a.stages))

    rows = []  # (method, frequency, seconds, steps, note)
    progress("lamina, default settings")
    lam, lam_time = best_of(
        a.repeat, lambda: run_lamina(a.lamina, a.stages, False, a.integrator, a.latency)
    )
    note = a.integrator + (" latency" if a.latency == "on" else " no latency")
    rows.append(("lamina default", lam["frequency_hz"], lam_time, lam["steps"], note))
    discard, used = lam["periods_discarded"], lam["periods_used"]
    if not a.skip_lamina_reference:
        progress("lamina --reference")
        ref, ref_time = run_lamina(a.lamina, a.stages, True)
        rows.append(("lamina --reference", ref["frequency_hz"], ref_time, ref["steps"], ""))
    scipy_runs = []  # (rtol, frequency, seconds)
    for rtol in rtols + [a.converged_rtol]:
        atol = a.atol_ratio * rtol * VDD
        progress(f"scipy BDF, rtol {rtol:.0e}")
        res, t = best_of(
            1 if rtol == a.converged_rtol else a.repeat,
            lambda: run_scipy(a.stages, rtol, atol, discard, used),
        )
        scipy_runs.append((rtol, res["frequency_hz"], t))
        note = f"atol {atol:.0e} V"
        if rtol == a.converged_rtol:
            note += ", taken as converged"
        rows.append((f"scipy BDF rtol {rtol:.0e}", res["frequency_hz"], t, res["steps"], note))
    f_conv = scipy_runs[-1][1]

    def error(f):
        return (f - f_conv) / f_conv

    print(
        f"{a.stages}-stage square-law ring from the single-edge start; frequency over "
        f"{used} periods after {discard} start-up periods of out[0] (as Lamina's default run "
        f"chose them)"
    )
    print(f"{'method':<24}{'frequency (Hz)':>19}{'rel. error':>12}{'time (s)':>10}{'steps':>9}")
    for name, f, t, steps, note in rows:
        print(f"{name:<24}{f:>19.3f}{error(f):>12.2e}{t:>10.3f}{steps:>9}  {note}")
    print()

    lam_err = abs(error(lam["frequency_hz"]))
    for rtol, f, t in scipy_runs:
        if rtol == 1e-4:
            print(
                f"time ratio scipy rtol 1e-4 / lamina default: {t / lam_time:.1f} "
                f"(errors {abs(error(f)):.1e} and {lam_err:.1e})"
            )
    lamina_rows = [("lamina default", lam["frequency_hz"], lam_time)]
    if not a.skip_lamina_reference:
        lamina_rows.append(("lamina --reference", ref["frequency_hz"], ref_time))
    for name, f_lam, t_lam in lamina_rows:
        err = abs(error(f_lam))
        # The loosest scipy run at least as accurate as this Lamina run.
        equal = [r for r in scipy_runs[:-1] if abs(error(r[1])) <= err]
        if equal:
            rtol, f, t = max(equal, key=lambda r: r[0])
            print(
                f"time ratio at equal accuracy, scipy / {name}: {t / t_lam:.1f} (scipy rtol "
                f"{rtol:.0e}, error {abs(error(f)):.1e} against {err:.1e})"
            )
        else:
            print(f"equal accuracy to {name} ({err:.1e}): no scipy rtol tried reaches it")

    # Both must integrate the same equations: Lamina's reference setting is known to land a
    # few 1e-7 below the converged frequency (DEVELOPERS.md, numerics policy).
    check_name, check_f, limit = (
        ("lamina default", lam["frequency_hz"], 1e-3)
        if a.skip_lamina_reference
        else ("lamina --reference", ref["frequency_hz"], AGREEMENT)
    )
    err = error(check_f)
    verdict = "agree" if abs(err) <= limit else "DISAGREE"
    print(
        f"cross-check: {check_name} against scipy rtol {a.converged_rtol:.0e}: {err:.1e} "
        f"relative ({verdict}, limit {limit:.0e})"
    )
    if abs(err) > limit:
        sys.exit(1)


if __name__ == "__main__":
    main()

"""Monotone convex (Hagan & West 2006): published values and the method's properties.

References: NAG e01ce/e01cf example (tests/REFERENCES.md #11), Dehlbom's thesis (#12), Hagan & West's
example curve (#13, memory) and the construction itself (#14).
"""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.curves import curves_from_nodes
from pipeline.curves.monotone_convex import MonotoneConvexBlock, sector_g

AS_OF = np.array(["2030-01-02"], dtype="datetime64[D]")

# tests/REFERENCES.md #11 (NAG e01ce/e01cf example program; seen): knots and rates in percent
NAG_T = [10.0, 20.0, 30.0, 40.0, 50.0]
NAG_R = [3.0, 4.0, 4.7, 6.0, 6.0]
NAG_EXPECTED = [  # t, rate %, forward %
    (0, 2.500, 2.500), (1, 2.505, 2.515), (2, 2.520, 2.560), (3, 2.545, 2.635),
    (4, 2.580, 2.740), (5, 2.625, 2.875), (6, 2.680, 3.040),
]
# tests/REFERENCES.md #12 (Dehlbom 2020, Uppsala thesis; seen): discount factors at t = 1..5
DEHLBOM_T = [1.0, 2.0, 3.0, 4.0, 5.0]
DEHLBOM_D = [0.98, 0.955, 0.92, 0.88, 0.83]
DEHLBOM_DISCRETE = [0.0202, 0.0258, 0.0373, 0.0445, 0.0585]
DEHLBOM_FORWARDS = [0.0188, 0.0230, 0.0316, 0.0409, 0.0515, 0.0620]  # at t = 0..5
# tests/REFERENCES.md #13 (Hagan & West 2006 example curve; memory): use for properties only
HW_T = [0.1, 1.0, 4.0, 9.0, 20.0, 30.0]
HW_R = [0.081, 0.070, 0.044, 0.070, 0.040, 0.030]


def _curve(times, zeros, method="monotone_convex"):
    return curves_from_nodes(AS_OF, np.array([times]), np.array([zeros]), method)


@pytest.mark.parametrize(("t", "rate", "forward"), NAG_EXPECTED, ids=[f"t={t}" for t, _, _ in NAG_EXPECTED])
def test_nag_example_first_interval(t, rate, forward):
    # source: tests/REFERENCES.md #11, NAG e01ce/e01cf example; exact on [0, 10] (3 decimals, in percent)
    c = _curve(NAG_T, NAG_R)  # the method is scale-free: percent in, percent out
    tt = np.array([[float(t)]])
    r = float(c.zero_rate(tt)[0, 0])
    f = float(c.instantaneous_forward(tt)[0, 0])
    assert abs(r - rate) < 5e-4, f"rate at t={t}: expected {rate}, actual {r}, diff {r - rate}"
    assert abs(f - forward) < 5e-4, f"forward at t={t}: expected {forward}, actual {f}, diff {f - forward}"


def test_dehlbom_discrete_and_instantaneous_forwards():
    # source: tests/REFERENCES.md #12, Dehlbom (2020), 4 decimals
    zeros = -np.log(DEHLBOM_D) / np.array(DEHLBOM_T)
    block = MonotoneConvexBlock(np.array([DEHLBOM_T]), np.array([zeros]))
    np.testing.assert_allclose(block.discrete_forwards[0], DEHLBOM_DISCRETE, atol=5e-5)
    c = _curve(DEHLBOM_T, zeros)
    f = c.instantaneous_forward(np.arange(6.0)[None, :])[0]
    for t, (exp, act) in enumerate(zip(DEHLBOM_FORWARDS, f, strict=True)):
        assert abs(act - exp) < 5e-5, f"f({t}): expected {exp}, actual {act}, diff {act - exp}"
    np.testing.assert_allclose(block.knot_forwards[0], DEHLBOM_FORWARDS, atol=5e-5)


def test_hagan_west_curve_reproduces_nodes_and_discrete_forwards():
    # source: tests/REFERENCES.md #13, #14: integral of f over each interval = the discrete forward
    c = _curve(HW_T, HW_R)
    t = np.array([HW_T])
    z = c.zero_rate(t)[0]
    for tt, exp, act in zip(HW_T, HW_R, z, strict=True):
        assert abs(act - exp) < 1e-14, f"zero at {tt}: expected {exp}, actual {act}, diff {act - exp}"
    knots = np.concatenate([[0.0], HW_T])
    lnd = np.concatenate([[0.0], -np.array(HW_R) * np.array(HW_T)])
    discrete = -np.diff(lnd) / np.diff(knots)
    fwd = c.forward_rate(knots[None, :-1], knots[None, 1:])[0]
    np.testing.assert_allclose(fwd, discrete, rtol=0, atol=1e-14)
    # and by quadrature of the instantaneous forward (independent of ln D)
    for a, b, fd in zip(knots[:-1], knots[1:], discrete, strict=True):
        s = np.linspace(a, b, 20001)
        f = c.instantaneous_forward(s[None, :])[0]
        integral = np.sum((f[1:] + f[:-1]) / 2 * np.diff(s)) / (b - a)
        assert abs(integral - fd) < 1e-8, f"[{a}, {b}]: expected {fd}, actual {integral}"


def test_hagan_west_forwards_positive_and_continuous_where_linear_zero_kinks():
    mc = _curve(HW_T, HW_R)
    lz = _curve(HW_T, HW_R, "linear_zero")
    grid = np.linspace(0.0, 40.0, 40001)[None, :]
    f_mc = mc.instantaneous_forward(grid)[0]
    assert f_mc.min() > 0.0, f"monotone convex forward went negative: {f_mc.min()}"
    # continuity: the largest step between neighbouring points (1e-3 years apart) stays tiny
    assert np.max(np.abs(np.diff(f_mc))) < 1e-4
    eps = 1e-9
    nodes = np.array(HW_T[:-1])
    for curve, name in ((mc, "mc"), (lz, "lz")):
        left = curve.instantaneous_forward((nodes - eps)[None, :])[0]
        right = curve.instantaneous_forward((nodes + eps)[None, :])[0]
        jumps = np.abs(right - left)
        if name == "mc":
            assert jumps.max() < 1e-7, f"monotone convex forward jumps at nodes: {jumps}"
        else:
            # the kinks the paper warns of: linear zero rates make the forward jump at nodes
            assert jumps.max() > 0.01, f"expected linear-zero jumps, got {jumps}"
    f_lz = lz.instantaneous_forward(grid)[0]
    assert f_lz.min() < 0.0, "linear zero should produce a negative forward on this curve (paper)"


@pytest.mark.parametrize(("g0", "g1"), [
    (-0.5, 1.0), (0.5, -0.6), (-0.2, 1.0), (0.3, -1.0), (0.6, -0.1), (-0.6, 0.1),
    (0.2, 0.7), (-0.3, -0.4), (0.0, 0.0), (1e-3, 0.5), (0.4, 0.0),
], ids=["i-neg", "i-pos", "ii-neg", "ii-pos", "iii-pos", "iii-neg", "iv-pos", "iv-neg", "zero",
        "near-degenerate", "iv-edge"])
def test_sector_g_ends_and_zero_mean(g0, g1):
    # source: tests/REFERENCES.md #14: g(0) = g0, g(1) = g1 and the integral over [0, 1] is zero
    edges = np.linspace(0.0, 1.0, 400001)
    mid = (edges[1:] + edges[:-1]) / 2  # midpoint rule: g may jump at x = 0 in limiting sectors
    g_end, _ = sector_g(np.array([g0, g0]), np.array([g1, g1]), np.array([0.0, 1.0]))
    assert abs(g_end[0] - g0) < 1e-15 and abs(g_end[1] - g1) < 1e-15
    g, G = sector_g(np.full_like(mid, g0), np.full_like(mid, g1), mid)
    quad = np.sum(g) * (edges[1] - edges[0])
    assert abs(quad) < 1e-8, f"integral of g: expected 0, actual {quad}"
    # G is the running integral of g
    running = np.cumsum(g) * (edges[1] - edges[0]) - g * (edges[1] - edges[0]) / 2
    np.testing.assert_allclose(G, running, atol=1e-8)
    assert np.all(np.isfinite(g)) and np.all(np.isfinite(G))


def test_flat_forward_after_last_node():
    c = _curve(HW_T, HW_R)
    f = c.instantaneous_forward(np.array([[30.0, 35.0, 80.0]]))[0]
    assert f[0] == f[1] == f[2]


# --- every sector of g, against the paper's construction written out independently ----------------
#
# tests/REFERENCES.md #14 (Hagan & West 2006, the monotone convex method; the sector formulas from
# memory of the paper, re-derived from its conditions: g(0) = g0, g(1) = g1, zero integral over the
# interval). Written here in plain numpy, not from pipeline/curves/monotone_convex.py.

def hw_reference_forward(times, zeros, t):
    """Instantaneous forward f(t) of the monotone convex method on knots 0 < t_1 < ... < t_n with
    continuous zero rates r_i (no positivity collar: the test checks it would not act).
    Returns (f(t), sector of each t, knot forwards f_0..f_n, discrete forwards)."""
    knots = np.concatenate([[0.0], times])
    h = np.diff(knots)
    fd = np.diff(knots * np.concatenate([[0.0], zeros])) / h            # f^d_i on [t_{i-1}, t_i]
    n = len(times)
    f = np.empty(n + 1)
    f[1:n] = (h[:-1] * fd[1:] + h[1:] * fd[:-1]) / (h[:-1] + h[1:])    # interior knots
    f[0] = fd[0] - 0.5 * (f[1] - fd[0])
    f[n] = fd[-1] - 0.5 * (f[n - 1] - fd[-1])
    i = np.clip(np.searchsorted(knots, t, side="right") - 1, 0, n - 1)
    x = (t - knots[i]) / h[i]
    g0, g1 = f[i] - fd[i], f[i + 1] - fd[i]
    g = np.zeros_like(t)
    sector = np.full(t.shape, "zero", dtype=object)
    for k in range(len(t)):
        a, b, xx = g0[k], g1[k], x[k]
        if a == 0 and b == 0:
            continue
        if (a < 0 and -a / 2 <= b <= -2 * a) or (a > 0 and -2 * a <= b <= -a / 2):
            sector[k] = "i"       # the quadratic through g0 and g1 with zero integral
            g[k] = a * (1 - 4 * xx + 3 * xx ** 2) + b * (-2 * xx + 3 * xx ** 2)
        elif (a < 0 and b > -2 * a) or (a > 0 and b < -2 * a):
            sector[k] = "ii"      # flat at g0, then a quadratic up (down) to g1
            eta = (b + 2 * a) / (b - a)
            g[k] = a if xx <= eta else a + (b - a) * ((xx - eta) / (1 - eta)) ** 2
        elif (a > 0 and -a / 2 < b < 0) or (a < 0 and 0 < b < -a / 2):
            sector[k] = "iii"     # a quadratic from g0 down (up) to g1, then flat at g1
            eta = 3 * b / (b - a)
            g[k] = b + (a - b) * ((eta - xx) / eta) ** 2 if xx < eta else b
        else:
            sector[k] = "iv"      # g0 and g1 of one sign: two quadratics meeting at a minimum (maximum) A
            eta = b / (b + a)
            A = -a * b / (a + b)
            g[k] = A + (a - A) * ((eta - xx) / eta) ** 2 if xx <= eta else A + (b - A) * ((xx - eta) / (1 - eta)) ** 2
    return fd[i] + g, sector, f, fd


# knots chosen so that both signs of every sector occur across the intervals of the four days: two
# given by zero rates, two by discrete forwards with a sharp step (sector ii)
SECTOR_T = [0.5, 1.0, 2.0, 3.0, 5.0, 7.0, 10.0, 15.0, 20.0, 30.0]
_STEP_FORWARDS = [[0.030, 0.031, 0.050, 0.049, 0.030, 0.029, 0.035, 0.036, 0.034, 0.050],
                  [0.050, 0.049, 0.030, 0.031, 0.050, 0.036, 0.046, 0.040, 0.041, 0.038]]
SECTOR_ZEROS = [
    [0.030, 0.034, 0.031, 0.036, 0.040, 0.039, 0.045, 0.041, 0.047, 0.044],
    [0.050, 0.046, 0.047, 0.040, 0.041, 0.045, 0.043, 0.049, 0.046, 0.052],
    *(list(np.cumsum(np.array(fd) * np.diff([0.0, *SECTOR_T])) / np.array(SECTOR_T)) for fd in _STEP_FORWARDS),
]


def test_every_sector_matches_the_paper_construction_on_every_interval():
    zeros = np.array(SECTOR_ZEROS)
    n_days = len(zeros)
    times = np.tile(SECTOR_T, (n_days, 1))
    as_of = np.array(["2030-01-02", "2030-01-03", "2030-01-04", "2030-01-07"], dtype="datetime64[D]")
    c = curves_from_nodes(as_of, times, zeros, "monotone_convex")
    seen = set()
    for day in range(n_days):
        # 200 points inside each interval, the knots themselves excluded
        knots = np.concatenate([[0.0], times[day]])
        u = (np.arange(200) + 0.5) / 200
        t = (knots[:-1, None] + np.diff(knots)[:, None] * u[None, :]).ravel()
        want, sector, f, fd = hw_reference_forward(times[day], zeros[day], t)
        # the positivity collar (f_0 in [0, 2 f^d_1], f_i in [0, 2 min(f^d_i, f^d_i+1)], f_n in [0, 2 f^d_n])
        # would not act on these knots, so the plain construction is the whole method here
        assert fd.min() > 0 and f.min() > 0
        assert f[0] <= 2 * fd[0] and f[-1] <= 2 * fd[-1] and np.all(f[1:-1] <= 2 * np.minimum(fd[:-1], fd[1:]))
        got = c.instantaneous_forward(np.tile(t, (n_days, 1)))[day]
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
        seen |= {(s, np.sign(g0)) for s, g0 in zip(sector, np.repeat(f[:-1] - fd, 200), strict=True)}
    # every sector, with g0 of both signs, occurred
    assert {s for s, _ in seen} == {"i", "ii", "iii", "iv"}
    assert seen >= {(s, sgn) for s in ("i", "ii", "iii", "iv") for sgn in (-1.0, 1.0)}, sorted(seen)

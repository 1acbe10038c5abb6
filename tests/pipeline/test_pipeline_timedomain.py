"""Time-domain layout (pulsed gratings, switched deflector field): physics, round trip, errors.

Physics under test: with pulses at t1 < t2 < t3 (T1 = t2 − t1, T2 = t3 − t2) the fringe shift of a
transverse force F(t) is Δx = (1/m) ∫ w(t) F(t) dt with w(t) = (t − t1)·T2/T1 on [t1, t2] and
w(t) = t3 − t on [t2, t3].  It is the second difference of the trajectory sampled at the pulses,
Δx = x(t3) − (1 + T2/T1)·x(t2) + (T2/T1)·x(t1), which is blind to position and velocity; for
T1 = T2 = T and a uniform acceleration a it is a T², the gravity phase k a T² of the three-pulse
light-pulse atom interferometer (Phys. Rev. Lett. 67, 181 (1991); from memory).
"""

from __future__ import annotations

import itertools
import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import constants, integrate
from typer.testing import CliRunner

from polarbeam.cli.commands import app
from polarbeam.constants import alpha_a3_from_si, debye_from_si, si_from_debye
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.instrument.deflectors import SwitchedField, overlap
from polarbeam.instrument.layouts import TimeDomain
from polarbeam.pipeline.analysis import analyze, build_context
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    random_time_domain_campaign,
    simulate_campaign,
)

US = 1e-6
T = 24 * US
ROOT = Path(__file__).resolve().parents[2]
runner = CliRunner()


# --------------------------------------------------------------------------------------------
# weights and overlaps against closed forms and an independent trajectory integration


@pytest.mark.parametrize("t1", [0.0, 10 * US])
def test_uniform_force_gives_a_T2(t1):
    # Uniform acceleration over [t1, t3], T1 = T2 = T:  ∫ w dt = T²/2 + T²/2 = T²  (Δx = a T²).
    lay = TimeDomain(t1, t1 + T, t1 + 2 * T, 80e-9)
    assert math.isclose(lay.weight_integral(t1, t1 + 2 * T), T**2, rel_tol=1e-12)
    # the same with a switched field on exactly over [t1, t3] (field_on = 0 from the first pulse)
    g = 2.0e6
    field = SwitchedField(g, 0.0, 2 * T, origin=t1)
    assert math.isclose(overlap(lay, field), g * T**2, rel_tol=1e-12)
    # a field on longer than the sequence (before t1, after t3) adds nothing: w = 0 outside
    longer = SwitchedField(g, -5 * US, 2 * T + 10 * US, origin=t1)
    assert math.isclose(overlap(lay, longer), g * T**2, rel_tol=1e-12)


def test_uniform_force_shift_in_metres():
    # Worked number: a = 9.80665 m/s² (scipy.constants.g, standard gravity), T = 24 µs
    # → Δx = a T² = 5.6486e-9 m, φ = 2π Δx / d = 0.44364 rad for d = 80 nm.
    lay = TimeDomain(0.0, T, 2 * T, 80e-9)
    dx = constants.g * lay.weight_integral(0.0, 2 * T)
    assert math.isclose(dx, 5.6486304e-9, rel_tol=1e-7)
    assert math.isclose(lay.scale * dx, 0.443638, rel_tol=1e-5)


def test_field_inside_first_interval_hand_integral():
    # Unequal intervals: t1 = 5 µs, t2 = 25 µs (T1 = 20), t3 = 55 µs (T2 = 30); field on [8, 20].
    # ∫_{ta}^{tb} (t − t1)·T2/T1 dt = (T2 / 2T1)·[(tb − t1)² − (ta − t1)²]
    #                              = (30/40)·[15² − 3²] µs² = 0.75·216 = 162 µs².
    lay = TimeDomain(5 * US, 25 * US, 55 * US, 100e-9)
    field = SwitchedField(1.0, 3 * US, 12 * US, origin=5 * US)  # on at t1 + 3 µs for 12 µs
    assert field.span == pytest.approx((8 * US, 20 * US), abs=1e-18)
    assert math.isclose(overlap(lay, field), 162 * US**2, rel_tol=1e-12)


def test_field_inside_second_interval_hand_integral():
    # Same pulses; field on [30, 50] µs inside [t2, t3]:
    # ∫_{ta}^{tb} (t3 − t) dt = ½·[(t3 − ta)² − (t3 − tb)²] = ½·[25² − 5²] µs² = 300 µs².
    lay = TimeDomain(5 * US, 25 * US, 55 * US, 100e-9)
    field = SwitchedField(1.0, 25 * US, 20 * US, origin=5 * US)
    assert math.isclose(overlap(lay, field), 300 * US**2, rel_tol=1e-12)


def test_contract_window_hand_integral():
    # Contract set-up: pulses 0, 24, 48 µs, field on from 3 µs for 40 µs, i.e. over [3, 43] µs:
    # ∫_3^24 t dt + ∫_24^43 (48 − t) dt = (24² − 3²)/2 + (24² − 5²)/2 = 283.5 + 275.5 = 559 µs².
    lay = TimeDomain(0.0, T, 2 * T, 80e-9)
    assert math.isclose(overlap(lay, SwitchedField(1.0, 3 * US, 40 * US)), 559 * US**2)


def _second_difference_by_trajectory(t1, t2, t3, accel, breaks=()):
    """x(t3) − (1 + T2/T1) x(t2) + (T2/T1) x(t1) from a numerical solution of x'' = a(t).

    The ODE is integrated piece by piece between the pulses and the switching edges ``breaks``
    so that no step straddles a jump of the force.
    """
    edges = sorted({t1 - 5 * US, t1, t2, t3, *(b for b in breaks if t1 - 5 * US < b < t3)})
    y = [2e-6, 0.03]  # arbitrary start position and velocity: the second difference ignores them
    at = {}
    for lo, hi in itertools.pairwise(edges):
        mid = 0.5 * (lo + hi)
        sol = integrate.solve_ivp(
            lambda t, yy, mid=mid: [yy[1], accel(t, mid)],
            (lo, hi),
            y,
            rtol=1e-12,
            atol=1e-18,
            method="DOP853",
        )
        y = sol.y[:, -1]
        at[hi] = y[0]
    x1, x2, x3 = at[t1], at[t2], at[t3]
    r = (t3 - t2) / (t2 - t1)
    return x3 - (1 + r) * x2 + r * x1


@pytest.mark.parametrize(
    "t1,T1,T2,on,dur",
    [(0.0, 24, 24, 3, 40), (7.5, 20, 31, -4, 18), (12, 30, 22, 26, 40), (3, 15, 15, 10, 4)],
)
def test_overlap_against_trajectory_integration(t1, T1, T2, on, dur):
    # Independent check: integrate the motion under the switched force with scipy's ODE solver
    # and form the pulse-sampled second difference; it must equal ∫ w a dt.
    t1, T1, T2, on, dur = (x * US for x in (t1, T1, T2, on, dur))
    lay = TimeDomain(t1, t1 + T1, t1 + T1 + T2, 80e-9)
    a0 = 3.2  # m/s² while the field is on (F/m = α g V²/m)
    field = SwitchedField(1.0, on, dur, origin=t1)
    a, b = t1 + on, t1 + on + dur
    # the force of a piece is decided at its midpoint (no step straddles an edge)
    ref = _second_difference_by_trajectory(
        lay.t1, lay.t2, lay.t3, lambda t, mid: a0 if a <= mid <= b else 0.0, (a, b)
    )
    assert math.isclose(a0 * overlap(lay, field), ref, rel_tol=1e-8)


def test_waveform_against_quad_and_trajectory():
    # A coarse ramped waveform (t relative to the switch-on; amplitude linear between knots).
    # The force follows the square of the amplitude: F ∝ a(t)², so the integrand is piecewise
    # cubic and quad (adaptive Gauss–Kronrod, points at every knot) is the reference.
    t1 = 4 * US
    lay = TimeDomain(t1, t1 + 20 * US, t1 + 45 * US, 80e-9)
    tw = np.array([0.0, 6.0, 15.0, 30.0, 34.0]) * US
    amp = np.array([0.0, 1.0, 0.7, 0.9, 0.0])
    g = 1.7e6
    field = SwitchedField(g, 2 * US, None, (tuple(tw), tuple(amp)), origin=t1)
    start = t1 + 2 * US

    def integrand(t):
        return float(lay.weight(t)) * g * float(np.interp(t, start + tw, amp)) ** 2

    pts = sorted({*(start + tw).tolist(), lay.t2})
    ref, _ = integrate.quad(integrand, pts[0], pts[-1], points=pts[1:-1], epsabs=0, limit=200)
    assert math.isclose(overlap(lay, field), ref, rel_tol=1e-10)
    # and against the trajectory under a(t)² (amplitude linear, force quadratic in it)
    a0 = 2.0
    traj = _second_difference_by_trajectory(
        lay.t1,
        lay.t2,
        lay.t3,
        lambda t, mid: a0 * float(np.interp(t, start + tw, amp)) ** 2,
        tuple(start + tw),
    )
    assert math.isclose(a0 * overlap(lay, field) / g, traj, rel_tol=1e-8)


def test_time_shift_invariance_and_first_pulse_origin(tmp_path):
    # "Times measured from the first pulse": shifting every pulse by 10 µs must not change the
    # coupling, and the stated error of t1 alone must not move it either (∂ln C/∂t1 = 0).
    def coupling_for(pulses, t1_err=""):
        d = tmp_path / f"c{len(list(tmp_path.iterdir()))}"
        spec = InstrumentSpec.time_domain()
        simulate_campaign(d, [CompoundTruth("x", 200.0, 20.0, 0.0, (300.0,))], spec=spec, seed=1)
        toml = d / "campaign.toml"
        text = toml.read_text().replace(
            'pulse_times = ["0 us", "24 us", "48 us"]',
            f'pulse_times = ["{pulses[0]} {t1_err} us", "{pulses[1]} us", "{pulses[2]} us"]',
        )
        toml.write_text(text)
        return build_context(load_campaign(toml))

    c0 = coupling_for((0, 24, 48))
    c10 = coupling_for((10, 34, 58), "± 0.5")
    assert math.isclose(c10.coupling, c0.coupling, rel_tol=1e-12)
    # C = (2π/d)·g·559 µs² (hand integral above) for d = 80 nm, g = 2.0e6 m⁻³
    assert math.isclose(c0.coupling, 2 * math.pi / 80e-9 * 2.0e6 * 559e-12, rel_tol=1e-12)
    # d ln C / d(field_on) = (w(43 µs) − w(3 µs)) / 559 µs² with w(43) = 5 µs, w(3) = 3 µs
    # → 2/559 µs⁻¹ = 3.578e3 s⁻¹ (the propagation's numerical derivative must find it)
    assert math.isclose(c10.sensitivities["deflector.field_on"], 2 / 559 / US, rel_tol=1e-4)


# --------------------------------------------------------------------------------------------
# round trip: simulate → analyse over randomised time-domain campaigns

N_CAMPAIGNS = 600


@pytest.fixture(scope="module")
def pulls(tmp_path_factory):
    rng = np.random.default_rng(20270109)
    base = tmp_path_factory.mktemp("tdrt")
    out = {"alpha_eff": [], "alpha": [], "mu2": [], "mu": []}
    for i in range(N_CAMPAIGNS):
        truth = random_time_domain_campaign(base / f"c{i}", rng)
        (c,) = analyze(truth.path / "campaign.toml").compounds
        assert c.status != "failed", c.message
        t = truth.compounds["sample"]
        for s in c.series:
            ref = truth.alpha_eff_A3[(c.compound, s.temperature_K)]
            out["alpha_eff"].append((s.alpha_eff_A3 - ref) / s.alpha_eff_err_A3)
        if c.alpha is not None:
            a, da = (alpha_a3_from_si(x) for x in (c.alpha.nominal_value, c.alpha.std_dev))
            out["alpha"].append((a - t.alpha_A3) / da)
        if c.mu2 is not None:
            true_mu2 = si_from_debye(t.dipole_D) ** 2
            out["mu2"].append((c.mu2.nominal_value - true_mu2) / c.mu2.std_dev)
            # μ only where the *true* ⟨μ²⟩ is > 5σ (selection on the truth, never on the
            # estimate); a rare downward fluctuation reported as a limit keeps its ⟨μ²⟩ pull.
            if true_mu2 / c.mu2.std_dev > 5:
                if c.dipole is None:
                    out["mu"].append((c.mu2.nominal_value - true_mu2) / c.mu2.std_dev)
                else:
                    m, dm = (debye_from_si(x) for x in (c.dipole.nominal_value, c.dipole.std_dev))
                    out["mu"].append((m - t.dipole_D) / dm)
        shutil.rmtree(truth.path)
    return {k: np.array(v) for k, v in out.items()}


@pytest.mark.slow
@pytest.mark.parametrize("name", ["alpha_eff", "alpha", "mu2", "mu"])
def test_time_domain_pulls_are_honest(pulls, name):
    # Gaussian 1σ coverage: |pull| < 1 in 68.3 % of cases (common practice for error bars).
    p = pulls[name]
    assert p.size >= 150, p.size
    frac = float(np.mean(np.abs(p) < 1))
    print(f"{name}: n={p.size} |pull|<1: {frac:.3f} mean {p.mean():+.3f} sd {p.std():.3f}")
    assert abs(frac - 0.683) < 0.07
    # no bias: mean pull compatible with zero (series of one campaign share systematics)
    assert abs(p.mean()) < 4.0 / math.sqrt(p.size) + 0.05


# --------------------------------------------------------------------------------------------
# error branches and the velocity columns


@pytest.fixture
def td(tmp_path):
    comps = [
        CompoundTruth("polar-td", 240.0, 25.0, 2.0, (300.0, 450.0, 600.0)),
        CompoundTruth("apolar-td", 410.0, 48.0, 0.0, (300.0, 450.0, 600.0)),
    ]
    simulate_campaign(tmp_path / "td", comps, spec=InstrumentSpec.time_domain(), seed=11)
    return tmp_path / "td" / "campaign.toml"


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _one_line_exit_2(camp: Path, out: Path, pattern: str):
    with pytest.raises(InputError, match=pattern):
        analyze(camp)
    r = runner.invoke(app, ["analyze", str(camp), "--out", str(out), "--quiet"])
    assert r.exit_code == 2, r.output
    assert "Traceback" not in r.output
    lines = [ln for ln in r.stderr.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("error: "), lines


@pytest.mark.parametrize(
    "extra,pattern",
    [
        ('entrance = "0.2 m"', r"\[deflector\] entrance: not used by layout 'time-domain'"),
        ('length = "0.1 m"', r"\[deflector\] length: not used by layout 'time-domain'"),
        (
            'entrance = "0.2 m"\nlength = "0.1 m"',
            r"\[deflector\] entrance, length: not used by layout 'time-domain'; remove them; "
            r"the time-domain layout switches the field in time",
        ),
    ],
)
def test_spatial_deflector_keys_are_rejected(td, tmp_path, extra, pattern):
    _edit(td, 'model = "uniform"', f'model = "uniform"\n{extra}')
    _one_line_exit_2(td, tmp_path / "o", pattern)


@pytest.mark.parametrize(
    "on,dur",
    [("60 us", "40 ± 0.02 us"), ("-50 us", "10 ± 0.02 us"), ("48 us", "5 ± 0.02 us")],
)
def test_field_window_outside_the_pulses(td, tmp_path, on, dur):
    _edit(td, 'field_on = "3 ± 0.02 us"', f'field_on = "{on}"')
    _edit(td, 'field_duration = "40 ± 0.02 us"', f'field_duration = "{dur}"')
    _one_line_exit_2(
        td,
        tmp_path / "o",
        r"\[deflector\] field_on/field_duration: the switched field \[.*\] us \(from the first "
        r"pulse\) does not overlap the pulse sequence \[0, 48\] us",
    )


def test_field_on_and_duration_required(td, tmp_path):
    _edit(td, 'field_on = "3 ± 0.02 us"\n', "")
    _one_line_exit_2(td, tmp_path / "o", r"field_on: required for layout 'time-domain'")


def _with_waveform(td: Path, body: str | None, key: str = 'waveform = "wave.csv"') -> Path:
    _edit(td, 'field_duration = "40 ± 0.02 us"', key)
    if body is not None:
        (td.parent / "wave.csv").write_text(body)
    return td


@pytest.mark.parametrize(
    "body,pattern",
    [
        (None, r"wave.csv: waveform file not found"),
        ("t_s,amp\n0,0\n1e-5,1\n", r"wave.csv: missing column\(s\) amplitude"),
        ("t_s,amplitude\n0,0\n1e-5,high\n", r"wave.csv line 3: column 'amplitude' expected a num"),
        ("t_s,amplitude\n0,0\n1e-5,1.4\n", r"wave.csv line 3: column 'amplitude' expected a rel"),
        ("t_s,amplitude\n0,0\n1e-5,-0.1\n", r"line 3: column 'amplitude' expected a relative"),
        ("t_s,amplitude\n0,0\n2e-5,1\n1e-5,1\n", r"line 4: column 't_s' expected increasing"),
        ("t_s,amplitude\n0,1\n", r"wave.csv: expected at least two rows"),
        ("t_s,amplitude\n0,0\n1e-5,0\n", r"wave.csv: column 'amplitude' is zero everywhere"),
        ("t_s,amplitude\n0,0\n1e-5\n", r"wave.csv line 3: expected 2 cells, found 1"),
        ("", r"wave.csv: expected a header line"),
    ],
)
def test_waveform_file_problems(td, tmp_path, body, pattern):
    _one_line_exit_2(_with_waveform(td, body), tmp_path / "o", pattern)


def test_waveform_key_problems(td, tmp_path):
    _one_line_exit_2(
        _with_waveform(td, None, "waveform = 3"),
        tmp_path / "o",
        r"\[deflector\] waveform: expected a file path, found 3",
    )


def test_waveform_and_duration_together_rejected(td, tmp_path):
    _edit(td, 'model = "uniform"', 'model = "uniform"\nwaveform = "wave.csv"')
    (td.parent / "wave.csv").write_text("t_s,amplitude\n0,0\n1e-5,1\n3e-5,1\n4e-5,0\n")
    _one_line_exit_2(td, tmp_path / "o", r"field_duration, waveform: expected one of them")


def test_waveform_campaign_runs_and_matches_rectangular(td, tmp_path):
    # A rectangular waveform (steps of 1 fs) must give the rectangular result (same data).
    rect = analyze(td)
    body = "t_s,amplitude\n0,0\n1e-15,1\n3.9999999e-05,1\n4e-05,0\n"
    wave = analyze(_with_waveform(td, body))
    for a, b in zip(rect.compounds, wave.compounds, strict=True):
        for sa, sb in zip(a.series, b.series, strict=True):
            assert math.isclose(sa.alpha_eff_A3, sb.alpha_eff_A3, rel_tol=1e-6)


def _strip_velocity(shifts: Path) -> None:
    lines = shifts.read_text().splitlines()
    head = lines[0].split(",")
    keep = [i for i, h in enumerate(head) if not h.startswith("velocity")]
    shifts.write_text("\n".join(",".join(ln.split(",")[i] for i in keep) for ln in lines) + "\n")


def test_shifts_without_velocity_columns(td, tmp_path):
    before = analyze(td)
    _strip_velocity(td.parent / "shifts.csv")
    assert "velocity" not in (td.parent / "shifts.csv").read_text()
    out = tmp_path / "o"
    r = runner.invoke(app, ["analyze", str(td), "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    res = json.loads((out / "results.json").read_text())
    assert any("no velocity columns needed" in n for n in res["notes"])
    # the same data without the (ignored) velocity columns gives the same numbers
    after = analyze(td)
    for a, b in zip(before.compounds, after.compounds, strict=True):
        assert a.alpha.nominal_value == b.alpha.nominal_value
        assert a.alpha.std_dev == b.alpha.std_dev


def test_velocity_columns_are_ignored_and_reported(td, tmp_path):
    before = analyze(td)
    shifts = td.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    # garbage in an ignored column must not fail anything: it is never read
    lines[1] = lines[1].replace(",180,", ",not-a-speed,", 1)
    shifts.write_text("\n".join(lines) + "\n")
    out = tmp_path / "o"
    r = runner.invoke(app, ["analyze", str(td), "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    res = json.loads((out / "results.json").read_text())
    note = (
        "the velocity columns of shifts.csv (velocity_m_s, velocity_err_m_s, "
        "velocity_spread_m_s) were ignored"
    )
    assert any(note in n for n in res["notes"])
    assert note in (out / "report.md").read_text()
    for comp in res["compounds"]:
        for s in comp["series"]:
            assert s["velocity_m_s"] is None  # not read, not reported as a number
    after = analyze(td)
    for a, b in zip(before.compounds, after.compounds, strict=True):
        assert a.alpha.nominal_value == b.alpha.nominal_value


# --------------------------------------------------------------------------------------------
# the example campaign


def test_example_campaign_is_current_and_runs_clean(tmp_path):
    ex = ROOT / "examples" / "timedomain"
    # make_data.py rewrites the example deterministically into a given folder
    r = subprocess.run(
        [sys.executable, str(ex / "make_data.py"), "--out", str(tmp_path / "ex")],
        capture_output=True,
        text=True,
        env={"PYTHONPATH": str(ROOT / "src"), "PATH": ""},
        check=False,
    )
    assert r.returncode == 0, r.stderr
    for f in ("campaign.toml", "shifts.csv", "compounds.csv"):
        assert (tmp_path / "ex" / f).read_text() == (ex / f).read_text(), f
    res = runner.invoke(app, ["analyze", str(ex / "campaign.toml"), "--out", str(tmp_path / "o")])
    assert res.exit_code == 0, res.output
    props = (tmp_path / "o" / "properties.csv").read_text()
    assert "failed" not in props

"""Catalogue cases of issue 19: whole beam profiles (``[data] profiles``).

A compound without a V = 0 profile, a profile compound without a rotor model, and a deflector
without a field magnitude fail their compounds with one line; the others finish. A clean profile
campaign recovers μ and the rotational temperature (simulated here from the package's own profile
model with Poisson counts; the physics is tested in tests/extraction/test_extraction_profiles.py).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, run_case

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.rotors import LinearRotor
from polarbeam.beam.rotors.profiles import expected_counts, reweighted_populations
from polarbeam.constants import AMU, alpha_si_from_a3, si_from_debye
from polarbeam.contract.campaign import load_campaign
from polarbeam.extraction.context import build_context

HEAD = (
    "compound,temperature_K,velocity_m_s,velocity_err_m_s,velocity_spread_m_s,voltage_V,"
    "position_m,counts,rotational_temperature_K"
)
TRUTH = {"LP-1": (60.0, 8.0, 1.5, 5000e6, 8.0), "LP-2": (80.0, 10.0, 1.2, 4000e6, 12.0)}


def _write(folder: Path, *, drop_zero=(), field=True, rotors=True, compounds=None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    toml = (
        '[campaign]\ntitle = "profile campaign"\n\n[instrument]\nlayout = "beam-profile"\n'
        'detector_position = "1.45 ± 0.001 m"\n\n[deflector]\nmodel = "uniform"\n'
        'entrance = "0.3 ± 0.001 m"\nlength = "0.15 ± 0.0005 m"\n'
        'field_factor = "4e5 ± 1e3 m^-3"\n'
        + ('field_per_volt = "500 m^-1"\n' if field else "")
        + '\n[data]\nprofiles = "profiles.csv"\ncompounds = "compounds.csv"\n'
    )
    (folder / "campaign.toml").write_text(toml, encoding="utf-8")
    rot = ",linear,{b}" if rotors else ",,"
    (folder / "compounds.csv").write_text(
        "compound,mass_u,alpha_known_A3,rotor,rot_B_MHz\n"
        + "".join(
            f"{n},{m:g},{a:g}" + rot.format(b=f"{b / 1e6:g}") + "\n"
            for n, (m, a, _mu, b, _t) in TRUTH.items()
        ),
        encoding="utf-8",
    )
    if compounds is not None:  # rotor = auto cases: the compounds table as given
        (folder / "compounds.csv").write_text(compounds, encoding="utf-8")
    (folder / "profiles.csv").write_text(HEAD + "\nLP-1,300,600,0,30,0,0,1,\n", encoding="utf-8")
    ctx = build_context(load_campaign(folder / "campaign.toml"))  # the nominal coupling
    rng = np.random.default_rng(4)
    x = np.linspace(-1.5e-3, 1.5e-3, 200)
    bw = x[1] - x[0]
    v, wv = GaussianVelocity(600.0, 30.0).nodes(24)
    rows = []
    for name, (m, a, mu, b, trot) in TRUTH.items():
        rotor, com = LinearRotor(b), ctx.coupling / (m * AMU)
        for volt in (0.0, 5e3, 10e3, 15e3, 20e3):
            if volt == 0.0:
                if name in drop_zero:
                    continue
                lam = expected_counts(x, bw, 20e-6, 110e-6, 2.0, 3e4)
            else:
                e = 500.0 * volt
                st = rotor.states(si_from_debye(mu), 1.5 * trot, e)
                pop = reweighted_populations(st, 1.5 * trot, trot)
                kap = (alpha_si_from_a3(a) + st.mu_eff / e) * com * volt**2
                lam = expected_counts(
                    x, bw, 20e-6, 110e-6, 2.0, 3e4, kap[:, None] / v**2, pop[:, None] * wv
                )
            rows += [
                f"{name},300,600,0,30,{volt:g},{xi:.6e},{n},"
                for xi, n in zip(x, rng.poisson(lam), strict=True)
            ]
    (folder / "profiles.csv").write_text(HEAD + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return folder / "campaign.toml"


def _build(**kw):
    def build(folder: Path) -> list[str]:
        camp = _write(folder / "camp", **kw)
        return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]

    return build


def _props(folder: Path) -> dict[str, dict[str, str]]:
    with (folder / "out" / "properties.csv").open(newline="", encoding="utf-8") as h:
        return {r["compound"]: r for r in csv.DictReader(h)}


def _clean(folder: Path) -> None:
    props = _props(folder)
    for name, (_m, _a, mu, _b, trot) in TRUTH.items():
        r = props[name]
        assert r["status"] == "ok" and r["response"] == "linear" and r["method"] == "profile fit"
        assert abs(float(r["dipole_D"]) - mu) < 4 * float(r["dipole_err_D"]), r
        t, dt = float(r["rotational_temperature_K"]), float(r["rotational_temperature_err_K"])
        assert abs(t - trot) < 4 * dt, r
        lo, hi = float(r["dipole_lo_D"]), float(r["dipole_hi_D"])  # unified 68.3 % interval
        assert lo < float(r["dipole_D"]) < hi and r["dipole_upper_D"] == "", r
    # series.csv: the centroid and width of every profile (one row per voltage), measured and model
    with (folder / "out" / "series.csv").open(newline="", encoding="utf-8") as h:
        rows = list(csv.DictReader(h))
    for name in TRUTH:
        mine = [r for r in rows if r["compound"] == name]
        assert [float(r["voltage_V"]) for r in mine] == [0.0, 5e3, 10e3, 15e3, 20e3]
        cents = [float(r["centroid_m"]) for r in mine]
        assert cents == sorted(cents), cents  # the beam moves out as V² grows
        for r in mine:
            pull = (float(r["centroid_m"]) - float(r["model_centroid_m"])) / float(
                r["centroid_err_m"]
            )
            assert abs(pull) < 4, r
            assert float(r["width_m"]) > 0 and float(r["width_err_m"]) > 0
            assert float(r["ld_ratio"]) < 1.0  # a cold linear rotor follows LD only partly
    figs = {p.name.split("-")[-1] for p in (folder / "out" / "figures").glob("LP-*")}
    assert "profiles.svg" in figs and "profiles.png" in figs


def _fails(names, text):
    def check(folder: Path) -> None:
        props = _props(folder)
        for name in TRUTH:
            if name in names:
                assert props[name]["status"] == "failed", props[name]
                assert text in props[name]["message"], props[name]["message"]
            else:
                assert props[name]["status"] == "ok", props[name]

    return check


AUTO = (
    "compound,mass_u,alpha_known_A3,rotor,rot_B_MHz,smiles\n"
    "LP-1,60,8,auto,,O=C=S\n"  # OCS: a rigid linear rotor, B ≈ 5018 MHz from MMFF94 (truth 5000)
    "LP-2,80,10,auto,,\n"  # no structure
)
AUTO_BAD = (
    "compound,mass_u,alpha_known_A3,rotor,rot_B_MHz,smiles\n"
    "LP-1,60,8,auto,5000,O=C=S\n"  # auto with a stated constant
    "LP-2,80,10,auto,,CCCCO\n"  # floppy: ergodic, no profile model
)


def _auto_ok(folder: Path) -> None:
    props = _props(folder)
    r = props["LP-1"]
    assert r["status"] == "ok" and r["response"] == "linear", r
    assert r["response_reason"].startswith("rotor auto → linear: rigid linear rotor"), r
    assert "(derived from the structure)" in r["response_reason"] and "rotor auto" in r["message"]
    assert abs(float(r["dipole_D"]) - 1.5) < 4 * float(r["dipole_err_D"]), r
    assert props["LP-2"]["status"] == "failed"
    assert props["LP-2"]["message"] == (
        "compounds.csv line 3: rotor 'auto' expected a structure (a smiles cell or a [data] "
        "structures record), found none"
    )
    report = (folder / "out" / "report.md").read_text(encoding="utf-8")
    assert "derived from the structure" in report


CASES = [
    Case("clean profile campaign", _build(), 0, None, _clean),
    Case(
        "profiles without a V = 0 profile",
        _build(drop_zero=("LP-1",)),
        1,
        None,
        _fails(
            ("LP-1",),
            "compound 'LP-1': series LP-1 @ 300 K expected a profile at V = 0 (the undeflected "
            "beam), found voltages 5000, 10000, 15000, 20000",
        ),
    ),
    Case(
        "profile data without a field magnitude",
        _build(field=False),
        2,
        None,
        _fails(
            ("LP-1", "LP-2"),
            "profile data need the field magnitude; expected a deflector with field_per_volt "
            "(uniform, field-map) or one that computes it (two-wire, numerical), found none",
        ),
    ),
    Case(
        "profile data without a rotor model",
        _build(rotors=False),
        2,
        None,
        _fails(("LP-1", "LP-2"), "profile data need a rigid rotor; expected the rotor columns"),
    ),
]


CASES += [
    Case("rotor auto from a structure", _build(compounds=AUTO), 1, None, _auto_ok),
    Case(
        "rotor auto with rotor columns given",
        _build(compounds=AUTO_BAD),
        2,
        None,
        lambda folder: _auto_bad(folder),
    ),
]


def _auto_bad(folder: Path) -> None:
    props = _props(folder)
    assert props["LP-1"]["status"] == "failed" and props["LP-1"]["message"] == (
        "compounds.csv line 2: rotor 'auto' derives the rotor columns from the structure; "
        "expected rot_B_MHz empty, found values"
    )
    assert props["LP-2"]["status"] == "failed"
    assert props["LP-2"]["message"].startswith(
        "compound 'LP-2': profile data need a rigid rotor; expected rotor 'auto' to find one, "
        "found ergodic: floppy: 2 rotatable bond(s)"
    ), props["LP-2"]["message"]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_profiles(case, tmp_path):
    run_case(case, tmp_path)

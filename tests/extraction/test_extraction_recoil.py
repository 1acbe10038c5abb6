"""Photon-recoil cross-sections: physics against outside references, round trips, input errors.

References used below:

* Poisson statistics: the probability generating function Σ_n P(n; n̄) sⁿ = exp(n̄(s − 1))
  (textbook; here checked against a direct sum with scipy.stats.poisson).
* Photon recoil velocity ħk/m = h/(λ m) with CODATA constants (scipy.constants); the alkali
  D2-line recoil velocities quoted from the standard alkali D-line data tables (from memory):
  Na 589.158 nm (vacuum), m = 22.98976928 u → 2.9461 cm/s; ⁸⁷Rb 780.241 nm (vacuum),
  m = 86.909180527 u → 5.8845 mm/s.
* Photon energy hc/λ with hc = 1239.841984 eV·nm (CODATA 2018, from memory).
* Gaussian beam fluence 2E/(π w0²)·exp(−2r²/w0²) (laser optics, common practice), checked by
  numerical integration over the plane.
* Isotropic emission: the recoil component along an axis is ħk·cos θ with cos θ uniform on
  [−1, 1], so ⟨exp(iφ_e cos θ)⟩ = sin φ_e/φ_e; checked by quadrature over the sphere.
* Classical moiré picture of a three-grating deflectometer (common practice): the fringe at the
  third grating shifts by x3 − x1 − (x2 − x1)(L1 + L2)/L1, x_i the displacement of a trajectory at
  grating i; checked against the layout weight used by the recoil model.
"""

from __future__ import annotations

import json
import math
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
import uncertainties
from scipy import constants as sc
from scipy import integrate, stats
from typer.testing import CliRunner

from polarbeam._util.optional import missing_reason
from polarbeam.beam.photon_recoil import (
    emission_factor,
    kick_phase,
    mean_photons,
    poisson_phasor,
    recoil_phasor,
)
from polarbeam.cli.commands import app
from polarbeam.constants import AMU, CM2
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.extraction.recoil import (
    gaussian_effective_area,
    photon_energy,
    recoil_observables,
    recoil_velocity,
)
from polarbeam.instrument.layouts import TalbotLau, TimeDomain
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign
from polarbeam.simulation.recoil import (
    LaserTruth,
    RecoilCompoundTruth,
    random_recoil_campaign,
    simulate_recoil_campaign,
)

runner = CliRunner()
EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "recoil"

# --------------------------------------------------------------------------------------------
# physics
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "nbar,phi,g",
    [(0.3, 0.4, 1.0), (2.0, 1.7, 1.0), (5.0, -2.9, 1.0), (1.2, 0.8, 0.7), (8.0, 3.5, 0.45)],
)
def test_poisson_phasor_equals_direct_sum(nbar, phi, g):
    # Σ_n Poisson(n; n̄)·(g e^{iφ1})^n summed term by term (scipy.stats.poisson)
    n = np.arange(0, 200)
    direct = np.sum(stats.poisson.pmf(n, nbar) * (g * np.exp(1j * phi)) ** n)
    assert poisson_phasor(nbar, phi, g) == pytest.approx(direct, rel=1e-12, abs=1e-14)
    # the monochromatic velocity "average" is the same thing
    v = 200.0
    r = recoil_phasor(np.array([nbar]), phi * v, v, 0.0)
    if g == 1.0:
        assert r[0] == pytest.approx(direct, rel=1e-12, abs=1e-14)


def test_small_mean_photon_limit():
    # n̄ ≪ 1 and φ1 ≪ 1: phase ≈ n̄ φ1 (one photon at most, each turning the fringe by φ1)
    nbar = np.array([1e-4, 1e-3])
    phi1 = 1e-3
    ph, vis = recoil_observables(nbar, phi1 * 150.0, 150.0, 0.0)
    np.testing.assert_allclose(ph, nbar * phi1, rtol=1e-3)
    # n̄ ≪ 1 at any φ1: R ≈ 1 + n̄(e^{iφ1} − 1), phase ≈ n̄ sin φ1, 1 − |R| ≈ n̄(1 − cos φ1)
    phi1 = 1.3
    ph, vis = recoil_observables(nbar, phi1 * 150.0, 150.0, 0.0)
    np.testing.assert_allclose(ph, nbar * math.sin(phi1), rtol=2e-3)
    np.testing.assert_allclose(1 - vis, nbar * (1 - math.cos(phi1)), rtol=2e-3)
    # with a velocity spread the small-n̄ phase is n̄·⟨sin φ1(v)⟩ over the Gaussian distribution
    v0, s = 150.0, 20.0
    k = phi1 * v0
    pdf = stats.norm(v0, s).pdf
    mean_sin, _ = integrate.quad(lambda v: pdf(v) * math.sin(k / v), v0 - 6.5 * s, v0 + 6.5 * s)
    ph, _ = recoil_observables(np.array([1e-5]), k, v0, s, nodes=96)
    assert ph[0] / 1e-5 == pytest.approx(mean_sin, rel=1e-3)


def test_phase_is_continuous_beyond_pi():
    # monochromatic: arg R = n̄ g sin φ1 exactly (no wrapping), |R| = exp(−n̄(1 − g cos φ1))
    nbar = np.array([1.0, 3.0, 6.0, 9.0])
    phi1, g = 1.2, 0.8
    ph, vis = recoil_observables(
        nbar, phi1, velocity_dependent=False, emission_coefficient=2.0, fluorescence_yield=0.4
    )
    g = 0.6 + 0.4 * math.sin(2.0) / 2.0
    np.testing.assert_allclose(ph, nbar * g * math.sin(phi1), rtol=1e-10)
    np.testing.assert_allclose(vis, np.exp(-nbar * (1 - g * math.cos(phi1))), rtol=1e-10)
    assert ph[-1] > math.pi  # tracked, not wrapped
    # negative kicks (direction −1) mirror the phase
    ph_neg, vis_neg = recoil_observables(nbar, -phi1, velocity_dependent=False)
    ph_pos, vis_pos = recoil_observables(nbar, phi1, velocity_dependent=False)
    np.testing.assert_allclose(ph_neg, -ph_pos, rtol=1e-12)
    np.testing.assert_allclose(vis_neg, vis_pos, rtol=1e-12)


def test_velocity_average_against_direct_quadrature():
    # ⟨exp(n̄(e^{iK/v} − 1))⟩ over a Gaussian velocity distribution by adaptive quadrature
    v0, s, k, nbar = 180.0, 0.15 * 180.0, 1.8 * 180.0, 1.5
    pdf = stats.norm(v0, s).pdf

    def part(fn):
        return integrate.quad(
            lambda v: pdf(v) * fn(np.exp(nbar * (np.exp(1j * k / v) - 1))),
            v0 - 8 * s,
            v0 + 8 * s,
            limit=200,
        )[0]

    direct = part(np.real) + 1j * part(np.imag)
    r = recoil_phasor(np.array([nbar]), k, v0, s, nodes=96)[0]
    assert r == pytest.approx(direct, rel=1e-6)
    ph, vis = recoil_observables(np.array([nbar]), k, v0, s, nodes=96)
    assert vis[0] == pytest.approx(abs(direct), rel=1e-6)
    assert ph[0] == pytest.approx(np.angle(direct), rel=1e-6)


def test_recoil_velocity_codata():
    h, u = sc.h, sc.physical_constants["atomic mass constant"][0]
    # worked example: m = 500 u at 532 nm, h/(λ m) = 6.62607015e-34 /
    # (532e-9 × 500 × 1.66053906660e-27) = 1.50012e-3 m/s (SI-exact h, CODATA 2018 m_u)
    assert recoil_velocity(532e-9, 500 * AMU) == pytest.approx(1.50012e-3, rel=1e-5)
    assert recoil_velocity(532e-9, 500 * u) == pytest.approx(h / (532e-9 * 500 * u), rel=1e-14)
    # ħk/m with k = 2π/λ is the same number
    assert recoil_velocity(532e-9, 500 * u) == pytest.approx(
        sc.hbar * 2 * math.pi / 532e-9 / (500 * u), rel=1e-12
    )
    # alkali D2 recoil velocities (standard D-line data tables, from memory)
    assert recoil_velocity(589.158e-9, 22.98976928 * u) == pytest.approx(2.9461e-2, rel=1e-4)
    assert recoil_velocity(780.241e-9, 86.909180527 * u) == pytest.approx(5.8845e-3, rel=1e-4)


def test_photon_energy_and_mean_photons():
    # hc = 1239.841984 eV nm (CODATA 2018, from memory): 532 nm → 2.330530 eV
    assert photon_energy(532e-9) / sc.e == pytest.approx(1239.841984 / 532, rel=1e-8)
    # n̄ = σE/(A ħω): 1e-16 cm², 30 µJ on 0.8 mm² at 532 nm (ħω = 3.734e-19 J) → 1.0043 photons
    n = mean_photons(1e-16 * CM2, 30e-6, 0.8e-6, 532e-9)
    assert n == pytest.approx(30e-6 * 1e-20 / (0.8e-6 * 6.62607015e-34 * 299792458 / 532e-9))
    assert n == pytest.approx(1.0043, rel=1e-4)


def test_gaussian_effective_area():
    w0, e = 0.9e-3, 1.0

    def fluence(r):
        return 2 * e / (math.pi * w0**2) * math.exp(-2 * r**2 / w0**2)

    total, _ = integrate.quad(lambda r: 2 * math.pi * r * fluence(r), 0, 10 * w0)
    assert total == pytest.approx(e, rel=1e-10)  # the profile carries the pulse energy
    for r in (0.0, 0.2e-3, 0.7e-3):
        assert e / gaussian_effective_area(w0, r) == pytest.approx(fluence(r), rel=1e-12)
    assert gaussian_effective_area(w0) == pytest.approx(math.pi * w0**2 / 2, rel=1e-15)


@pytest.mark.parametrize("phi_e", [0.05, 1.0, 2.5, 7.0])
def test_emission_factor_is_the_isotropic_average(phi_e):
    # ⟨exp(iφ_e cos θ)⟩ over the sphere: ½∫_0^π sin θ cos(φ_e cos θ) dθ (the sine part vanishes)
    avg, _ = integrate.quad(lambda t: 0.5 * math.sin(t) * math.cos(phi_e * math.cos(t)), 0, math.pi)
    imag, _ = integrate.quad(
        lambda t: 0.5 * math.sin(t) * math.sin(phi_e * math.cos(t)), 0, math.pi
    )
    assert abs(imag) < 1e-12
    for q in (0.0, 0.3, 1.0):
        assert emission_factor(q, phi_e) == pytest.approx((1 - q) + q * avg, rel=1e-10)


@pytest.mark.parametrize("z", [0.05, 0.2, 0.37, 0.45, 0.7])
def test_kick_phase_matches_the_moire_trajectory(z):
    lay = TalbotLau(0.0, 0.38, 0.76, 266e-9)
    dv, v = 6e-5, 180.0

    def x(zg):  # transverse displacement at zg of a trajectory kicked at z
        return dv / v * max(zg - z, 0.0)

    x1, x2, x3 = x(lay.z1), x(lay.z2), x(lay.z3)
    shift = x3 - x1 - (x2 - x1) * (lay.L1 + lay.L2) / lay.L1
    phi = kick_phase(dv, lay.weight(z), lay.period, v)
    assert phi == pytest.approx(2 * math.pi * shift / lay.period, rel=1e-12)


def test_time_domain_kick_is_velocity_free():
    lay = TimeDomain(0.0, 25e-6, 50e-6, 78.5e-9)
    dv = 3e-4
    # a kick at t between the 2nd and 3rd pulse: Δx = Δv (t3 − t) (ballistic, common practice)
    phi = kick_phase(dv, lay.weight(40e-6), lay.period)
    assert phi == pytest.approx(2 * math.pi * dv * 10e-6 / 78.5e-9, rel=1e-12)


# --------------------------------------------------------------------------------------------
# round trips: simulate → analyse → pulls
# --------------------------------------------------------------------------------------------

N_CAMPAIGNS = 200


@pytest.fixture(scope="module")
def round_trip(tmp_path_factory):
    rng = np.random.default_rng(20261202)
    sigma, yields, info = [], [], []
    for i in range(N_CAMPAIGNS):
        d = tmp_path_factory.mktemp(f"recoil{i}")
        # re-emission off, stated and fitted in turn (a third each)
        truth = random_recoil_campaign(d, rng, reemission=("off", "stated", "fit")[i % 3])
        res = analyze(d / "campaign.toml")
        (c,) = res.recoil.compounds
        assert c.status != "failed", c.message
        t = truth.compounds["sample"]
        for f in c.fits:
            s_true = t.cross_sections_cm2[f.laser]
            sigma.append((f.cross_section_cm2 - s_true) / f.cross_section_err_cm2)
        if c.yield_fitted:
            q = c.fluorescence_yield
            yields.append((q.nominal_value - t.fluorescence_yield) / q.std_dev)
        camp = load_campaign(d / "campaign.toml")
        spreads = [float(np.max(s.spreads / s.velocities)) for s in camp.recoil.compounds[0].series]
        mode = "fit" if t.fit_yield else ("stated" if t.fluorescence_yield > 0 else "off")
        info.append((camp.layout, mode, max(spreads)))
    return np.array(sigma), np.array(yields), info


@pytest.mark.slow
def test_sigma_pulls_are_honest(round_trip):
    p, _, info = round_trip
    frac = float(np.mean(np.abs(p) < 1))
    print(
        f"σ pulls: n={p.size} from {len(info)} campaigns, fraction |pull|<1 = {frac:.3f}, "
        f"mean {p.mean():+.3f}, sd {p.std():.3f}"
    )
    assert p.size >= N_CAMPAIGNS
    # Gaussian 1σ coverage 68.3 % (common practice for validating error bars)
    assert abs(frac - 0.683) < 0.07
    # no bias: mean pull compatible with zero (pulls of one campaign share inputs)
    assert abs(p.mean()) < 4.0 / math.sqrt(p.size) + 0.05
    assert 0.85 < p.std() < 1.15


@pytest.mark.slow
def test_round_trip_covers_the_advertised_range(round_trip):
    _, _, info = round_trip
    layouts = {i[0] for i in info}
    modes = {i[1] for i in info}
    assert layouts == {"talbot-lau", "time-domain"}
    assert modes == {"off", "stated", "fit"}
    spatial = [i[2] for i in info if i[0] == "talbot-lau"]
    assert max(spatial) > 0.13 and min(spatial) < 0.02  # velocity spreads 0 … 15 %


@pytest.mark.slow
def test_fitted_yield_pulls(round_trip):
    _, q, _ = round_trip
    frac = float(np.mean(np.abs(q) < 1))
    print(f"q pulls: n={q.size}, fraction |pull|<1 = {frac:.3f}, mean {q.mean():+.3f}")
    assert q.size >= 60
    # fewer samples: the binomial 1σ of the fraction is ~0.06 for 66 pulls; allow ±2σ
    tol = 2.0 * math.sqrt(0.683 * 0.317 / q.size)
    assert abs(frac - 0.683) < tol
    assert abs(q.mean()) < 3.0 / math.sqrt(q.size)


# --------------------------------------------------------------------------------------------
# a small fixed campaign for scaling, correlation and error branches
# --------------------------------------------------------------------------------------------


def _small_campaign(path: Path) -> Path:
    lasers = [
        LaserTruth("green", 532e-9, 0.03, 0.0002, area=0.8e-6, area_err=0.04e-6),
        LaserTruth(
            "red",
            660e-9,
            0.035,
            0.0002,
            waist=0.9e-3,
            waist_err=0.02e-3,
            beam_offset=0.15e-3,
            beam_offset_err=0.03e-3,
            energy_scale_err=0.03,
        ),
    ]
    comps = [
        RecoilCompoundTruth("mol-one", 1450.0, {"green": 3e-16, "red": 0.5e-16}),
        RecoilCompoundTruth(
            "mol-two",
            2100.0,
            {"green": 1e-16, "red": 2e-16},
            fluorescence_yield=0.5,
            fluorescence_yield_err=0.05,
        ),
    ]
    simulate_recoil_campaign(path, comps, lasers, seed=5, phase_noise=0.02, visibility_noise=0.01)
    return path / "campaign.toml"


@pytest.fixture
def camp(tmp_path):
    return _small_campaign(tmp_path / "camp")


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _sigmas(res):
    return {(c.compound, f.laser): f.cross_section for c in res.recoil.compounds for f in c.fits}


def test_area_and_energy_calibration_scale_sigma_exactly(camp):
    base = _sigmas(analyze(camp))
    _edit(camp, 'area = "0.8 ± 0.04 mm^2"', 'area = "1.6 ± 0.08 mm^2"')
    _edit(camp, 'energy_scale = "1 ± 0.03"', 'energy_scale = "2 ± 0.06"')
    new = _sigmas(analyze(camp))
    for (comp, laser), s in base.items():
        factor = 2.0 if laser == "green" else 0.5
        assert new[(comp, laser)].nominal_value == pytest.approx(factor * s.nominal_value, 1e-6)
        assert new[(comp, laser)].std_dev == pytest.approx(factor * s.std_dev, rel=1e-4)


def test_budget_and_correlations(camp):
    res = analyze(camp)
    s = _sigmas(res)
    from polarbeam.uncertain import variance_budget

    b = variance_budget(s[("mol-one", "green")])
    assert {"laser green: area", "fit statistics", "laser green: position"} <= set(b)
    assert sum(b.values()) == pytest.approx(1.0, rel=1e-9)
    b2 = variance_budget(s[("mol-two", "red")])
    assert {"laser red: waist", "laser red: energy_scale", "fluorescence yield: mol-two"} <= set(b2)
    # σ of two compounds measured with the same laser share its area error: correlation
    # ρ = ∏ of the area shares' square roots (both dominated by the area here)
    rho = uncertainties.correlation_matrix([s[("mol-one", "green")], s[("mol-two", "green")]])
    a1 = b["laser green: area"]
    a2 = variance_budget(s[("mol-two", "green")])["laser green: area"]
    assert rho[0, 1] == pytest.approx(math.sqrt(a1 * a2), rel=0.05)
    assert rho[0, 1] > 0.5


def test_report_files_and_reemission_note(camp, tmp_path):
    out = tmp_path / "out"
    r = runner.invoke(app, ["analyze", str(camp), "--out", str(out)])
    assert r.exit_code == 0, r.output
    text = (out / "recoil.csv").read_text().splitlines()
    head = text[0].split(",")
    assert head[:7] == [
        "compound",
        "laser",
        "wavelength_nm",
        "cross_section_cm2",
        "cross_section_err_cm2",
        "mean_photons_at_max",
        "reduced_chi2",
    ]
    assert len(text) == 5
    report = (out / "report.md").read_text()
    assert "Isotropic re-emission used: stated fluorescence yield" in report
    assert "## Cautions" in report and "safety officer" in report
    summary = json.loads((out / "results.json").read_text())
    rows = {
        (c["compound"], la["laser"]): la
        for c in summary["recoil"]["compounds"]
        for la in c["lasers"]
    }
    first = text[1].split(",")
    assert float(first[3]) == pytest.approx(rows[(first[0], first[1])]["cross_section_cm2"])
    pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))
    assert (out / "figures" / "recoil_spectrum.png").read_bytes()[:4] == b"\x89PNG"


def test_fitted_yield_column(camp, tmp_path):
    _set_yield(camp, "mol-two", "fit")
    res = analyze(camp, tmp_path / "out")
    two = next(c for c in res.recoil.compounds if c.compound == "mol-two")
    assert two.yield_fitted and isinstance(two.fluorescence_yield, uncertainties.UFloat)
    head = (tmp_path / "out" / "recoil.csv").read_text().splitlines()[0]
    assert "fluorescence_yield,fluorescence_yield_err" in head


# --------------------------------------------------------------------------------------------
# input errors
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "old,new,pattern",
    [
        ('name = "green"', 'name = "green"\ncolour = "green"', r"'green'.*unknown key|unknown key"),
        ('wavelength = "532 nm"\n', "", r"\[\[laser\]\] 'green' wavelength: required key missing"),
        ('area = "0.8 ± 0.04 mm^2"', 'area = "0.8 mm^2"\nwaist = "1 mm"', r"found both"),
        ('area = "0.8 ± 0.04 mm^2"\n', "", r"exactly one of area .* found neither"),
        ('name = "red"', 'name = "green"', r"laser 'green' defined twice"),
        ("direction = +1", "direction = 0", r"direction: expected \+1 or -1, found 0"),
        ('position = "0.03 ± 0.0002 m"', 'position = "0.9 m"', r"position: expected between"),
        ('position = "0.03 ± 0.0002 m"', 'position = "3 us"', r"position: expected a unit of m"),
        ('area = "0.8 ± 0.04 mm^2"', 'area = "-0.8 mm^2"', r"area: expected > 0"),
        (
            'area = "0.8 ± 0.04 mm^2"',
            'area = "0.8 mm^2"\nbeam_offset = "1 mm"',
            r"beam_offset: only used with waist",
        ),
        ('recoil = "recoil.csv"\n', "", r"\[\[laser\]\]: given but \[data\] recoil is missing"),
        ('recoil = "recoil.csv"', 'recoil = "nowhere.csv"', r"nowhere.csv: recoil file not found"),
        ("[data]", "[data]\nbogus = 1", r"unknown key\(s\) in \[data\]: 'bogus'"),
        ("[campaign]", "[lasers]\n[campaign]", r"unknown table\(s\) 'lasers'.*\[\[laser\]\]"),
    ],
)
def test_structural_errors(camp, tmp_path, old, new, pattern):
    _edit(camp, old, new)
    with pytest.raises(InputError, match=pattern):
        load_campaign(camp)
    r = runner.invoke(app, ["analyze", str(camp), "--out", str(tmp_path / "o"), "--quiet"])
    assert r.exit_code == 2
    assert "Traceback" not in r.output
    lines = [ln for ln in r.output.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("error: ") and re.search(pattern, lines[0])


def _set_yield(camp: Path, compound: str, cell: str) -> None:
    comp = camp.parent / "compounds.csv"
    lines = comp.read_text().splitlines()
    col = lines[0].split(",").index("fluorescence_yield")
    for n, line in enumerate(lines):
        cells = line.split(",")
        if cells[0] == compound:
            cells[col] = cell
            lines[n] = ",".join(cells)
    comp.write_text("\n".join(lines) + "\n")


def test_single_laser_table_is_refused(camp):
    text = camp.read_text()
    first = text.index("[[laser]]")
    second = text.index("[[laser]]", first + 1)
    text = text[:second] + text[text.index("[data]") :]
    camp.write_text(text.replace("[[laser]]", "[laser]"))
    with pytest.raises(InputError, match=r"expected an array of tables .* single table \[laser\]"):
        load_campaign(camp)


def test_recoil_without_lasers(camp):
    text = camp.read_text()
    start, end = text.index("[[laser]]"), text.index("[data]")
    camp.write_text(text[:start] + text[end:])
    with pytest.raises(InputError, match=r"\[data\] recoil: expected at least one \[\[laser\]\]"):
        load_campaign(camp)


def test_beam_profile_layout_is_refused(camp):
    text = camp.read_text()
    text = re.sub(
        r'layout = "talbot-lau"\ngrating_period = .*\ngrating_positions = .*\n',
        'layout = "beam-profile"\ndetector_position = "1.2 m"\n',
        text,
    )
    camp.write_text(text)
    with pytest.raises(InputError, match=r"needs a fringe layout .* found 'beam-profile'"):
        load_campaign(camp)


def test_unknown_laser_in_recoil_csv(camp):
    csv = camp.parent / "recoil.csv"
    lines = csv.read_text().splitlines()
    lines[3] = lines[3].replace(",green,", ",blue,")
    csv.write_text("\n".join(lines) + "\n")
    with pytest.raises(
        InputError, match=r"recoil.csv line 4: column 'laser' expected one of green, red .* 'blue'"
    ):
        load_campaign(camp)


def test_missing_recoil_column(camp):
    csv = camp.parent / "recoil.csv"
    csv.write_text(csv.read_text().replace("visibility_ratio_err", "vis_err", 1))
    with pytest.raises(InputError, match=r"recoil.csv: missing column\(s\) visibility_ratio_err"):
        load_campaign(camp)


def _corrupt(camp: Path, compound: str, column: str, value: str) -> int:
    csv = camp.parent / "recoil.csv"
    lines = csv.read_text().splitlines()
    col = lines[0].split(",").index(column)
    for n, line in enumerate(lines[1:], start=2):
        cells = line.split(",")
        if cells[0] == compound:
            cells[col] = value
            lines[n - 1] = ",".join(cells)
            csv.write_text("\n".join(lines) + "\n")
            return n
    raise AssertionError(compound)


@pytest.mark.parametrize(
    "column,value,expect",
    [
        ("pulse_energy_J", "0", "expected a number > 0"),
        ("pulse_energy_J", "-2e-6", "expected a number > 0"),
        ("phase_err_rad", "0", "expected a number > 0"),
        # a negative visibility ratio no longer fails the compound (issue 20): it is dropped
        # and reported, see test_extraction_recoil_modes.py::test_negative_rician_ratio_dropped
        ("phase_rad", "nan", "expected a number"),
        ("velocity_m_s", "fast", "expected a number > 0"),
    ],
)
def test_bad_row_fails_only_its_compound(camp, tmp_path, column, value, expect):
    line = _corrupt(camp, "mol-one", column, value)
    res = analyze(camp)
    by = {c.compound: c for c in res.recoil.compounds}
    assert by["mol-one"].status == "failed"
    assert f"recoil.csv line {line}: column '{column}' {expect}" in by["mol-one"].message
    assert by["mol-two"].status != "failed" and len(by["mol-two"].fits) == 2
    assert res.exit_code == 1
    r = runner.invoke(app, ["analyze", str(camp), "--out", str(tmp_path / "o"), "--quiet"])
    assert r.exit_code == 1
    assert "failed (recoil): mol-one" in r.output
    assert "mol-one,,,,,,,failed" in (tmp_path / "o" / "recoil.csv").read_text()


@pytest.mark.parametrize(
    "cell,expect",
    [
        ("1.5", "'fluorescence_yield' expected a number 0..1 or 'fit', found '1.5'"),
        ("lots", "'fluorescence_yield' expected a number 0..1 or 'fit', found 'lots'"),
    ],
)
def test_bad_fluorescence_yield_fails_compound(camp, cell, expect):
    _set_yield(camp, "mol-two", cell)
    res = analyze(camp)
    by = {c.compound: c for c in res.recoil.compounds}
    assert by["mol-two"].status == "failed"
    assert f"compounds.csv: compound 'mol-two' column {expect}" in by["mol-two"].message
    assert by["mol-one"].status != "failed"


def test_compound_missing_from_compounds_csv(camp):
    comp = camp.parent / "compounds.csv"
    comp.write_text(
        "\n".join(ln for ln in comp.read_text().splitlines() if not ln.startswith("mol-one")) + "\n"
    )
    res = analyze(camp)
    by = {c.compound: c for c in res.recoil.compounds}
    assert by["mol-one"].status == "failed" and "not listed" in by["mol-one"].message


def test_every_recoil_compound_failed_exit_2(camp, tmp_path):
    _corrupt(camp, "mol-one", "pulse_energy_J", "0")
    _corrupt(camp, "mol-two", "pulse_energy_J", "0")
    r = runner.invoke(app, ["analyze", str(camp), "--out", str(tmp_path / "o"), "--quiet"])
    assert r.exit_code == 2


# --------------------------------------------------------------------------------------------
# campaigns with deflection data too, and the worked example
# --------------------------------------------------------------------------------------------


def test_deflection_and_recoil_in_one_campaign(tmp_path):
    defl = tmp_path / "both"
    simulate_campaign(
        defl,
        [CompoundTruth("defl-one", 200.0, 25.0, 1.5, (300.0, 450.0, 600.0))],
        spec=InstrumentSpec.talbot_lau(),
        seed=np.random.default_rng(3),
    )
    rec = _small_campaign(tmp_path / "rec")
    rtext = rec.read_text()
    lasers = rtext[rtext.index("[[laser]]") : rtext.index("[data]")]
    toml = defl / "campaign.toml"
    text = toml.read_text().replace("[data]\n", lasers + '[data]\nrecoil = "recoil.csv"\n')
    toml.write_text(text)
    shutil.copy(rec.parent / "recoil.csv", defl / "recoil.csv")
    comp = defl / "compounds.csv"
    comp.write_text(comp.read_text() + "mol-one,1450,0,\nmol-two,2100,0,\n")
    res = analyze(toml, tmp_path / "out")
    assert [c.compound for c in res.compounds] == ["defl-one"]
    assert res.compounds[0].alpha is not None
    assert {c.compound for c in res.recoil.compounds} == {"mol-one", "mol-two"}
    assert res.unmeasured == ()  # recoil compounds count as measured
    assert res.exit_code == 0
    report = (tmp_path / "out" / "report.md").read_text()
    assert "## defl-one" in report and "## Photon-recoil absorption cross-sections" in report
    assert (tmp_path / "out" / "recoil.csv").is_file()
    assert (tmp_path / "out" / "properties.csv").read_text().count("defl-one") == 1


def test_shifts_still_required_without_recoil(camp):
    text = camp.read_text()
    start, end = text.index("[[laser]]"), text.index("[data]")
    text = text[:start] + text[end:]
    camp.write_text(text.replace('recoil = "recoil.csv"\n', ""))
    with pytest.raises(InputError, match=r"\[deflector\] model: required key missing"):
        load_campaign(camp)


def test_example_runs_clean_and_recovers_the_truth(tmp_path):
    out = tmp_path / "x"
    r = runner.invoke(app, ["analyze", str(EXAMPLE / "campaign.toml"), "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "error" not in r.output.lower()
    truth = json.loads((EXAMPLE / "truth.json").read_text())["cross_sections_cm2"]
    res = analyze(EXAMPLE / "campaign.toml")
    assert all(c.status == "ok" for c in res.recoil.compounds), [
        c.message for c in res.recoil.compounds
    ]
    for c in res.recoil.compounds:
        for f in c.fits:
            t = truth[c.compound][f.laser]
            assert 0.5e-16 < f.cross_section_cm2 < 5e-16 or t < 0.5e-16  # dye-like magnitude
            assert abs(f.cross_section_cm2 - t) < 3 * f.cross_section_err_cm2
    assert (out / "recoil.csv").is_file()


def test_example_is_reproducible(tmp_path):
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_example", EXAMPLE / "make_example.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.main(tmp_path)
    for name in ("campaign.toml", "compounds.csv", "recoil.csv"):
        assert (tmp_path / name).read_text() == (EXAMPLE / name).read_text(), name


def test_birge_scaling_and_html(camp):
    base = _sigmas(analyze(camp))
    csv = camp.parent / "recoil.csv"
    lines = csv.read_text().splitlines()
    head = lines[0].split(",")
    cols = [head.index("phase_err_rad"), head.index("visibility_ratio_err")]
    for n in range(1, len(lines)):
        cells = lines[n].split(",")
        for col in cols:
            cells[col] = f"{float(cells[col]) / 3:.6g}"  # errors understated three times
        lines[n] = ",".join(cells)
    csv.write_text("\n".join(lines) + "\n")
    plain = analyze(camp)
    assert all("reduced χ²" in c.message for c in plain.recoil.compounds)
    _edit(camp, "[data]", '[analysis]\nscale_errors = "birge"\n\n[data]')
    res = analyze(camp)
    for c in res.recoil.compounds:
        assert "scaled by √(χ²/ν)" in c.message
    scaled = _sigmas(res)
    for key, s in _sigmas(plain).items():
        assert scaled[key].nominal_value == pytest.approx(s.nominal_value, rel=1e-9)
        assert scaled[key].std_dev > s.std_dev
        # the noise was drawn at the original errors: Birge restores about the original error
        assert scaled[key].std_dev == pytest.approx(base[key].std_dev, rel=0.5)
    html = res.recoil._repr_html_()
    assert "mol-one" in html and "<table>" in html

"""The geometry predictions against openwind, an independent 1-D visco-thermal
bore model (openwind on PyPI: input impedance by transfer matrices with
Zwikker-Kosten/Bessel wall losses, Kergomard-Garcia-type step masses and
Pade radiation impedances).

Each resonator is modelled for openwind as a bore from the closed bottom (where
its input impedance is computed) to the radiating mouth; f0 and Q are read from
the first impedance peak (openwind's phase-zero crossing and phase slope).
Both sides use openwind's own air properties, so only the acoustics is compared.

Tolerances (DESIGN.md section 4 and the issue): f0 within 0.5 % (spheres
1.5 %), Q within 10 %. Two comparisons per geometry:

- like for like: our 1-D model with the same physics as openwind (no viscous
  end term, no losses on the closed end and the steps, which openwind does not
  model) -- f0 and Q;
- the headline ``predict().f0_hz`` (which adds those end losses, and for
  spheres takes the midpoint with the 3-D inner end correction) -- f0 only:
  its Q is lower than openwind's by the end terms openwind leaves out (see
  docs/geometry.md), which is checked as a direction, not a tolerance.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

openwind = pytest.importorskip("openwind")

from characterize.physics.air import AirState  # noqa: E402
from characterize.physics.distributed import find_resonance  # noqa: E402
from characterize.physics.geometry import parse_object  # noqa: E402
from characterize.physics.helmholtz import bore_from_object, predict  # noqa: E402

TEMPERATURE_C = 20.0
HUMIDITY = 0.0


@pytest.fixture(scope="module")
def ow_air() -> AirState:
    """Our AirState carrying openwind's own air properties."""
    from openwind.continuous.physics import Physics

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ph = Physics(TEMPERATURE_C, humidity=HUMIDITY)
    mu, cp, kappa = float(ph.mu(0)), float(ph.Cp(0)), float(ph.kappa(0))
    return AirState(TEMPERATURE_C, HUMIDITY, 101325.0, 4e-4, float(ph.c(0)), float(ph.rho(0)),
                    mu, kappa, float(ph.gamma(0)), cp, mu * cp / kappa)


def _sphere_bore(radius_m: float, neck_radius_m: float, neck_length_m: float,
                 n: int = 40) -> list:
    """A sphere cut where its radius equals the neck's, as conical segments."""
    z_top = radius_m + math.sqrt(radius_m**2 - neck_radius_m**2)
    z = np.linspace(0.0, z_top, n + 1)
    r = np.sqrt(np.maximum(radius_m**2 - (z - radius_m) ** 2, 0.0))
    r[0] = 1e-4  # openwind needs a non-zero radius at the entrance
    segments = [[float(z[i]), float(z[i + 1]), float(r[i]), float(r[i + 1]), "linear"]
                for i in range(n)]
    segments.append([float(z_top), float(z_top + neck_length_m), neck_radius_m, neck_radius_m,
                     "linear"])
    return segments


def _cyl(*pieces: tuple[float, float]) -> list:
    """Stacked cylinders [(radius, length), ...] from the bottom up."""
    out, x = [], 0.0
    for r, ln in pieces:
        out.append([x, x + ln, r, r, "linear"])
        x += ln
    return out


NECK_U = {"outer_end": "unflanged", "inner_end": "flanged"}
NECK_F = {"outer_end": "flanged", "inner_end": "flanged"}

#: name -> (object file mapping, openwind bore, openwind radiation, f0 tolerance)
CASES = {
    # the physics sheet's bottle: a = 9 mm, L = 40 mm, 0.35 L as a 60 mm cylinder
    "bottle": ({"cavity": {"shape": "cylinder", "diameter": "60 mm", "length": "123.79 mm"},
                "neck": {"diameter": "18 mm", "length": "40 mm", **NECK_U}},
               _cyl((0.030, 0.12379), (0.009, 0.040)), "unflanged", 0.005),
    "wine-bottle-profile": ({"cavity": {"shape": "profile", "sections": [
        ["76 mm", "200 mm"], ["50 mm", "30 mm"]]},
        "neck": {"diameter": "19 mm", "length": "75 mm", **NECK_U}},
        _cyl((0.038, 0.200), (0.025, 0.030), (0.0095, 0.075)), "unflanged", 0.005),
    "squat-cylinder": ({"cavity": {"shape": "cylinder", "diameter": "150 mm", "length": "40 mm"},
                        "neck": {"diameter": "30 mm", "length": "20 mm", **NECK_F}},
                       _cyl((0.075, 0.040), (0.015, 0.020)), "infinite_flanged", 0.005),
    "jar-profile": ({"cavity": {"shape": "profile", "sections": [["80 mm", "90 mm"],
                                                                   ["50 mm", "15 mm"]]},
                     "neck": {"diameter": "24 mm", "length": "28 mm", **NECK_U}},
                    _cyl((0.040, 0.090), (0.025, 0.015), (0.012, 0.028)), "unflanged", 0.005),
    # a box as its equal-area round bore (openwind's bores are round): the box's
    # rectangular section has a 14 % longer perimeter, which only moves the small
    # cavity losses
    "box-as-bore": ({"cavity": {"shape": "box", "width": "200 mm", "depth": "150 mm",
                                "height": "300 mm"},
                     "neck": {"diameter": "50 mm", "length": "110 mm", "outer_end": "flanged",
                              "inner_end": "flanged"}},
                    _cyl((math.sqrt(0.2 * 0.15 / math.pi), 0.300), (0.025, 0.110)),
                    "infinite_flanged", 0.005),
    "sphere": ({"cavity": {"shape": "sphere", "diameter": "87.44 mm"},
                "neck": {"diameter": "18 mm", "length": "40 mm", **NECK_U}},
               _sphere_bore(0.04372, 0.009, 0.040), "unflanged", 0.015),
    "tube": ({"kind": "tube", "tube": {"diameter": "20 mm", "length": "300 mm",
                                       "open_end": "unflanged"}},
             _cyl((0.010, 0.300)), "unflanged", 0.005),
}


def _openwind_peak(bore: list, radiation: str, f_guess_hz: float) -> tuple[float, float]:
    from openwind import ImpedanceComputation

    f = np.linspace(0.85 * f_guess_hz, 1.15 * f_guess_hz, 1501)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ic = ImpedanceComputation(f, bore, temperature=TEMPERATURE_C, humidity=HUMIDITY,
                                  losses=True, radiation_category=radiation,
                                  compute_method="TMM")
        fr, q, _ = ic.resonance_peaks(1, display_warning=False)
    return float(fr[0]), float(q[0])


@pytest.fixture(scope="module")
def results(ow_air):
    out = {}
    for name, (data, bore, radiation, tol) in CASES.items():
        obj = parse_object(data, name)
        p = predict(obj, ow_air)
        like = find_resonance(bore_from_object(obj, end_losses=False,
                                               viscous_end_term_over_radius=0.0),
                              ow_air, p.f0_hz)
        out[name] = (p, like, _openwind_peak(bore, radiation, p.f0_hz), tol)
    return out


@pytest.mark.parametrize("name", list(CASES))
def test_like_for_like_f0_and_q(results, name):
    _, like, (f_ow, q_ow), tol = results[name]
    # openwind, same geometry and air: f0 within 0.5 % (1.5 % spheres), Q within 10 %
    assert like.f_hz == pytest.approx(f_ow, rel=min(tol, 0.005))
    assert like.q == pytest.approx(q_ow, rel=0.10)


@pytest.mark.parametrize("name", list(CASES))
def test_headline_prediction_f0(results, name):
    p, _, (f_ow, _), tol = results[name]
    # openwind: the headline prediction within 0.5 % (spheres 1.5 %)
    assert p.f0_hz == pytest.approx(f_ow, rel=tol)


@pytest.mark.parametrize("name", list(CASES))
def test_end_losses_only_lower_q(results, name):
    p, like, _, _ = results[name]
    # the viscous end term and end-wall heat exchange are extra losses (common
    # practice), so the headline Q sits below the like-for-like Q, by less than half
    assert 0.5 * like.q < p.q_predicted < like.q


def test_plain_lumped_formula_runs_high_for_bottles(results):
    # The issue: the plain lumped formula runs about 2 to 5 % high for bottle-like
    # cavities (openwind as reference); the physics sheet gives +4.9 % for its bottle.
    for name in ("bottle", "wine-bottle-profile", "jar-profile"):
        p, _, (f_ow, _), _ = results[name]
        assert 0.015 < p.f0_lumped_hz / f_ow - 1 < 0.12, name

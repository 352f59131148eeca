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
- the headline ``predict().f0_hz`` (which adds those end losses) -- f0 and,
  for the smooth-wall part of the predicted Q (``q_smooth_wall``), Q within 5 %:
  its Q is lower than openwind's by the end terms openwind leaves out (see
  docs/geometry.md), which is checked as a direction, not a tolerance.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

openwind = pytest.importorskip("openwind")

from characterize.objectfile import parse_object  # noqa: E402
from characterize.physics.air import AirState  # noqa: E402
from characterize.physics.distributed import find_resonance  # noqa: E402
from characterize.physics.geometry import AirOverrides, Cavity, Neck, ResonatorObject  # noqa: E402
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


def _cavity(**kw) -> Cavity:
    """A cavity whose volume is its shape's."""
    import dataclasses

    c = Cavity(volume_m3=1.0, volume_source="shape", **kw)
    return dataclasses.replace(c, volume_m3=c.shape_volume_m3)


def _object(name: str, cavity: Cavity, neck: Neck, kind: str = "helmholtz") -> ResonatorObject:
    return ResonatorObject(name, cavity, neck, AirOverrides(), name, kind)


def _ellipsoid_bore(a: float, b: float, c: float, neck_area: float, neck_radius: float,
                    neck_length: float, n: int = 60) -> list:
    """An ellipsoid (c along the axis) as its equal-area round bore, cut where
    its section equals the neck's, then the neck."""
    z_top = c + c * math.sqrt(1.0 - neck_area / (math.pi * a * b))
    z = np.linspace(0.0, z_top, n + 1)
    r = np.sqrt(np.maximum(a * b * (1.0 - ((z - c) / c) ** 2), 0.0))
    r[0] = 1e-4
    seg = [[float(z[i]), float(z[i + 1]), float(r[i]), float(r[i + 1]), "linear"]
           for i in range(n)]
    seg.append([float(z_top), float(z_top + neck_length), neck_radius, neck_radius, "linear"])
    return seg


def _pieces(*pieces: tuple[float, float, float]) -> list:
    """Round pieces [(r_start, r_end, length), ...] from the bottom up (cones allowed)."""
    out, x = [], 0.0
    for r0, r1, ln in pieces:
        out.append([x, x + ln, r0, r1, "linear"])
        x += ln
    return out


_U, _F = "unflanged", "flanged"
#: Shapes built from the dataclasses (the object-file keys for them are
#: documented in docs/geometry.md): name -> (object, openwind bore, radiation, f0 tol)
SHAPE_CASES = {
    # a bottle whose shoulder narrows into a tapered neck: body 76 mm, a 50 mm
    # conical shoulder to 28 mm, then a neck widening inwards from 19 mm at the
    # mouth (45 mm straight, then a 30 mm cone to 28 mm)
    "tapered-neck-bottle": (
        _object("tapered-neck-bottle",
                _cavity(shape="profile", sections=((0.076, 0.200), (0.076, 0.028, 0.050))),
                Neck(0.019, 0.075, _U, _F, shape="profile",
                     sections=((0.019, 0.019, 0.045), (0.019, 0.028, 0.030)))),
        _pieces((0.038, 0.038, 0.200), (0.038, 0.014, 0.050), (0.014, 0.0095, 0.030),
                (0.0095, 0.0095, 0.045)), "unflanged", 0.005),
    # a conical flask: a cone from 90 mm to 30 mm over 120 mm, a straight 24 mm neck
    "conical-flask": (
        _object("conical-flask",
                _cavity(shape="profile", sections=((0.090, 0.030, 0.120),)),
                Neck(0.024, 0.040, _U, _F)),
        _pieces((0.045, 0.015, 0.120), (0.012, 0.012, 0.040)), "unflanged", 0.005),
    "ellipsoid": (
        _object("ellipsoid", _cavity(shape="ellipsoid", semi_axes_m=(0.050, 0.035, 0.060)),
                Neck(0.018, 0.030, _U, _F)),
        _ellipsoid_bore(0.050, 0.035, 0.060, math.pi * 0.009**2, 0.009, 0.030),
        "unflanged", 0.015),
    # an oval tin as its equal-area round bore (the ellipse's longer perimeter
    # only moves the small cavity losses)
    "elliptic-cylinder": (
        _object("elliptic-cylinder",
                _cavity(shape="elliptic-cylinder", semi_axes_m=(0.040, 0.025), length_m=0.100),
                Neck(0.020, 0.025, _F, _F)),
        _pieces((math.sqrt(0.040 * 0.025),) * 2 + (0.100,), (0.010, 0.010, 0.025)),
        "infinite_flanged", 0.005),
    "flanged-tube": (
        _object("flanged-tube", _cavity(shape="tube", diameter_m=0.025, length_m=0.400),
                Neck(0.025, 0.400, _F, "closed"), "tube"),
        _pieces((0.0125, 0.0125, 0.400)), "infinite_flanged", 0.005),
}


@pytest.fixture(scope="module")
def results(ow_air):
    out = {}
    cases = {name: (parse_object(data, name), bore, radiation, tol)
             for name, (data, bore, radiation, tol) in CASES.items()}
    cases.update(SHAPE_CASES)
    for name, (obj, bore, radiation, tol) in cases.items():
        p = predict(obj, ow_air)
        like = find_resonance(bore_from_object(obj, end_losses=False,
                                               viscous_end_term_over_radius=0.0),
                              ow_air, p.f0_hz)
        out[name] = (p, like, _openwind_peak(bore, radiation, p.f0_hz), tol)
    return out


ALL_CASES = [*CASES, *SHAPE_CASES]


@pytest.mark.parametrize("name", ALL_CASES)
def test_like_for_like_f0_and_q(results, name):
    _, like, (f_ow, q_ow), tol = results[name]
    # openwind, same geometry and air: f0 within 0.5 % (1.5 % spheres), Q within 10 %
    assert like.f_hz == pytest.approx(f_ow, rel=min(tol, 0.005))
    assert like.q == pytest.approx(q_ow, rel=0.10)


@pytest.mark.parametrize("name", ALL_CASES)
def test_smooth_wall_q(results, name):
    p, _, (_, q_ow), _ = results[name]
    # openwind (smooth walls, no end losses), same geometry and air: the predicted
    # smooth-wall Q within 5 % (issue 15)
    assert p.q_smooth_wall == pytest.approx(q_ow, rel=0.05)


@pytest.mark.parametrize("name", ALL_CASES)
def test_headline_prediction_f0(results, name):
    p, _, (f_ow, _), tol = results[name]
    # openwind: the headline prediction within 0.5 % (spheres 1.5 %)
    assert p.f0_hz == pytest.approx(f_ow, rel=tol)


@pytest.mark.parametrize("name", ALL_CASES)
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


def _openwind_open_open(radius_m: float, length_m: float, mouth: str, far: str,
                        f_guess_hz: float) -> tuple[float, float]:
    """The complex root of Z_in + Z_rad(far end) for a tube open at both ends:
    openwind's input impedance at the far end (the mouth radiating with its
    model) plus openwind's radiation impedance of the far end, both dimensional
    (Pa s/m^3); the root from a quadratic fit of D(omega) around its smallest
    |D| on a real grid."""
    from openwind import ImpedanceComputation
    from openwind.continuous.radiation_model import radiation_model

    f = np.linspace(0.9 * f_guess_hz, 1.1 * f_guess_hz, 2001)
    w = 2 * np.pi * f
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ic = ImpedanceComputation(f, _cyl((radius_m, length_m)), temperature=TEMPERATURE_C,
                                  humidity=HUMIDITY, losses=True, radiation_category=mouth,
                                  compute_method="TMM")
        from openwind.continuous.physics import Physics

        ph = Physics(TEMPERATURE_C, humidity=HUMIDITY)
    z_far = radiation_model(far).get_impedance(w, radius_m, float(ph.rho(0)), float(ph.c(0)),
                                               1.0)
    d = np.asarray(ic.impedance) + z_far
    i = int(np.argmin(np.abs(d)))
    sl = slice(max(i - 20, 0), i + 21)
    coef = np.polyfit(w[sl] - w[i], d[sl], 2)
    roots = np.roots(coef) + w[i]
    root = roots[np.argmin(np.abs(roots - w[i]))]
    return abs(root) / (2 * np.pi), abs(root) / (2 * root.imag)


@pytest.mark.parametrize("mouth, far", [("unflanged", "unflanged"), ("flanged", "unflanged"),
                                        ("flanged", "flanged")])
def test_open_open_tube(ow_air, mouth, far):
    radius, length = 0.010, 0.300
    obj = _object("open-tube", _cavity(shape="tube", diameter_m=2 * radius, length_m=length),
                  Neck(2 * radius, length, mouth, far), "tube")
    p = predict(obj, ow_air)
    ow_name = {"unflanged": "unflanged", "flanged": "infinite_flanged"}
    f_ow, q_ow = _openwind_open_open(radius, length, ow_name[mouth], ow_name[far], p.f0_hz)
    # half-wave resonance, c/(2 (L + both end corrections)) lumped (common practice)
    assert p.f0_lumped_hz == pytest.approx(
        ow_air.speed_of_sound_m_s / (2 * (length + p.outer_end_correction_m
                                          + p.inner_end_correction_m)), rel=1e-12)
    # openwind, same tube, both ends radiating: f0 within 0.5 %, smooth-wall Q within 5 %
    assert p.f0_hz == pytest.approx(f_ow, rel=0.005)
    assert p.q_smooth_wall == pytest.approx(q_ow, rel=0.05)
    # the next modes are near the harmonics n f1 (half-wave series)
    assert p.modes_hz[1] == pytest.approx(2 * p.modes_hz[0], rel=0.02)

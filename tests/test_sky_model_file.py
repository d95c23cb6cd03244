"""Model files: the documented example loads and round-trips; every bad file gives one clear
ModelError naming the line and the key; parameters, priors and ties behave as documented.

Outside references: tomllib (Python standard library) re-parses what we write; scipy.stats gives
the prior densities; astropy.units the unit conversions.
"""

import math

import numpy as np
import pytest
import tomllib

import uvfit
from uvfit.errors import ModelError, UvfitError
from uvfit.sky.model import SkyModel
from uvfit.sky.modelfile import loads

EXAMPLE = """angular_unit = "mas"            # unit of every position and size below
[[component]]
name = "core"
shape = "gaussian"
flux = 1.2                      # Jy; a plain number is a free parameter started there
east = { value = 0.0, fixed = true }   # offset toward increasing right ascension
north = { value = 0.0, fixed = true }
fwhm = { value = 0.05, min = 0.0, max = 1.0 }
[[component]]
name = "knot"
shape = "elliptical_gaussian"
flux = { value = 0.4, min = 0.0 }
east = 0.3
north = -0.2
fwhm = 0.1
axis_ratio = { value = 0.5, min = 0.05, max = 1.0 }
position_angle = 30.0           # degrees, north through east
"""


def test_example_loads(tmp_path):
    path = tmp_path / "example.toml"
    path.write_text(EXAMPLE)
    m = uvfit.load_model(path)
    assert [c.name for c in m.components] == ["core", "knot"]
    assert m.free_names == [
        "core.flux",
        "core.fwhm",
        "knot.flux",
        "knot.east",
        "knot.north",
        "knot.fwhm",
        "knot.axis_ratio",
        "knot.position_angle",
    ]
    p = m.parameters["knot.axis_ratio"]
    assert (p.value, p.min, p.max, p.fixed, p.tie) == (0.5, 0.05, 1.0, False, None)
    assert m.parameters["core.east"].fixed and m.parameters["core.flux"].min == -math.inf
    import astropy.units as un  # outside reference for the units

    assert m.parameters["knot.east"].unit == un.mas and m.parameters["knot.position_angle"].unit == un.deg
    assert m.parameters["core.flux"].unit == un.Jy
    assert m.rad_per_unit == pytest.approx((1 * un.mas).to_value(un.rad), rel=1e-15)


def test_example_round_trips(tmp_path):
    m = loads(EXAMPLE)
    text = m.to_toml()
    tomllib.loads(text)  # valid TOML (standard-library parser)
    assert loads(text) == m
    out = tmp_path / "saved.toml"
    m.save(out)
    assert uvfit.load_model(out) == m
    with pytest.raises(UvfitError):  # never overwrite without force
        m.save(out)
    m.parameters["core.flux"].value = 2.0
    m.save(out, force=True)
    assert uvfit.load_model(out).parameters["core.flux"].value == 2.0


def test_everything_round_trips():
    m = SkyModel.build(
        [
            {
                "name": "core",
                "shape": "gaussian",
                "flux": {"value": 1.0, "prior": "log_uniform", "min": 0.01, "max": 10.0},
                "fwhm": {"value": 0.05, "prior": {"normal": [0.05, 0.01]}},
                "spectral_index": {"value": -0.3, "min": -3.0, "max": 3.0},
                "reference_frequency": "86 GHz",
            },
            {
                "name": "pair",
                "shape": "double",
                "member": "elliptical_gaussian",
                "flux": 0.3,
                "flux_ratio": {"value": 0.5, "prior": {"uniform": [0.0, 2.0]}},
                "separation": 0.31415926535,
                "position_angle": 200.0,
                "fwhm_1": 0.01,
                "axis_ratio_1": 0.9,
                "position_angle_1": 1e-7,
                "fwhm_2": {"tie": "fwhm_1"},
                "axis_ratio_2": 0.2,
                "position_angle_2": {"value": 5.0, "fixed": True},
            },
            {"name": "jet", "shape": "point", "flux": -0.01, "east": {"tie": "pair.east"}, "north": 1e-20},
        ],
        angular_unit="uas",
        description='a "test" model',
    )
    m.fix("jet.flux", reason="degenerate\nwith something")
    again = loads(m.to_toml())
    assert again == m
    assert again.parameters["pair.fwhm_2"].tie == "pair.fwhm_1"
    assert again.components[0].reference_frequency == 86e9
    assert again.description == 'a "test" model'
    assert "# degenerate with something" in m.to_toml()


@pytest.mark.parametrize(
    "text,line,key,words",
    [
        # unknown shape: lists the known ones
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "blob"\nflux = 1.0\n',
            4,
            "shape",
            ["unknown shape", "gaussian", "ring_modulated"],
        ),
        # unknown key in a component
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\nfwhm = 0.1\nsize = 2\n',
            7,
            "size",
            ["unknown key", "fwhm"],
        ),
        # start value outside its bounds
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\n'
            "fwhm = { value = 2.0, max = 1.0 }\n",
            6,
            "fwhm",
            ["outside its bounds"],
        ),
        # a default bound: axis ratio above 1
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "elliptical_gaussian"\nflux = 1.0\n'
            "fwhm = 0.1\naxis_ratio = 1.5\nposition_angle = 0.0\n",
            7,
            "axis_ratio",
            ["outside its bounds"],
        ),
        # a minimum above its maximum
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = { value = 1.0, min = 3.0, max = 2.0 }\n'
            "fwhm = 0.1\n",
            5,
            "flux",
            ["above its maximum"],
        ),
        # a tie to a missing parameter
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\nfwhm = 0.1\n'
            '[[component]]\nname = "b"\nshape = "gaussian"\nflux = 1.0\nfwhm = { tie = "c.fwhm" }\n',
            11,
            "fwhm",
            ["c.fwhm", "does not exist"],
        ),
        # a unit astropy does not know
        (
            'angular_unit = "blorp"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n',
            1,
            "angular_unit",
            ["not a unit"],
        ),
        # a unit that is not an angle
        (
            'angular_unit = "km"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n',
            1,
            "angular_unit",
            ["not an angle"],
        ),
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\nspectral_index = 0.1\n'
            'reference_frequency = "230 GHzz"\n',
            7,
            "reference_frequency",
            ["frequency"],
        ),
        # duplicate component names
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n'
            '[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n',
            7,
            "name",
            ["duplicate"],
        ),
        # a missing parameter
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\n',
            2,
            None,
            ["'fwhm' is missing"],
        ),
        # a bad member shape of a double
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "double"\nmember = "triple"\nflux = 1.0\n',
            5,
            "member",
            ["unknown member"],
        ),
        # a tie between different kinds
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\nfwhm = { tie = "a.flux" }\n',
            6,
            "fwhm",
            ["same kind"],
        ),
        # a bad prior
        (
            'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\n'
            "fwhm = { value = 0.1, prior = { cauchy = [0, 1] } }\n",
            6,
            "fwhm",
            ["unknown prior"],
        ),
        # unknown top-level key
        (
            'angular_unit = "mas"\nunits = "x"\n[[component]]\nname = "a"\nshape = "point"\nflux = 1.0\n',
            2,
            "units",
            ["unknown top-level key"],
        ),
    ],
)
def test_bad_model_file_names_line_and_key(tmp_path, text, line, key, words):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ModelError) as info:
        uvfit.load_model(path)
    msg = str(info.value)
    assert f"line {line}" in msg, msg
    assert str(path) in msg
    if key is not None:
        assert f"key '{key}'" in msg, msg
    for w in words:
        assert w in msg, msg


def test_toml_syntax_error_gives_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text('angular_unit = "mas"\n[[component]]\nname = "a"\nflux = = 1\n')
    with pytest.raises(ModelError) as info:
        uvfit.load_model(path)
    assert "TOML syntax error" in str(info.value) and "line 4" in str(info.value)


def test_missing_file_is_a_model_error(tmp_path):
    with pytest.raises(ModelError, match="does not exist"):
        uvfit.load_model(tmp_path / "nope.toml")


def test_defaults():
    m = SkyModel.build(
        [
            {
                "name": "a",
                "shape": "double",
                "member": "gaussian",
                "flux": 1.0,
                "flux_ratio": 0.5,
                "separation": 0.1,
                "position_angle": 45.0,
                "fwhm_1": 0.01,
                "fwhm_2": 0.02,
            }
        ]
    )
    # east / north default to 0 and free; sizes >= 0; flux unbounded; flux ratio >= 0
    for n in ("a.east", "a.north"):
        p = m.parameters[n]
        assert (p.value, p.fixed, p.min, p.max) == (0.0, False, -math.inf, math.inf)
    assert m.parameters["a.fwhm_2"].min == 0.0 and m.parameters["a.separation"].min == 0.0
    assert m.parameters["a.flux_ratio"].min == 0.0 and m.parameters["a.flux"].min == -math.inf


def test_priors_against_scipy():
    # outside reference: scipy.stats densities
    from scipy import stats

    from uvfit.sky.parameters import LogUniform, Normal, Uniform

    x = np.array([0.2, 0.5, 3.0])
    np.testing.assert_allclose(Uniform(0.1, 2.0).log_prob(x), stats.uniform(0.1, 1.9).logpdf(x))
    np.testing.assert_allclose(Normal(0.4, 0.3).log_prob(x), stats.norm(0.4, 0.3).logpdf(x))
    np.testing.assert_allclose(LogUniform(0.1, 2.0).log_prob(x), stats.loguniform(0.1, 2.0).logpdf(x))
    rng = np.random.default_rng(5)
    s = LogUniform(0.1, 10.0).sample(rng, 4000)
    assert s.min() >= 0.1 and s.max() <= 10.0
    assert abs(np.mean(np.log10(s))) < 0.05  # log-uniform: log10 uniform on [-1, 1]


def test_sample_prior_is_seeded_and_inside_bounds():
    m = SkyModel.build(
        [
            {
                "name": "a",
                "shape": "gaussian",
                "flux": {"value": 1.0, "min": 0.0, "max": 2.0},
                "east": {"value": 0.0, "fixed": True},
                "north": {"value": 0.0, "fixed": True},
                "fwhm": {"value": 0.1, "max": 1.0, "prior": {"normal": [0.1, 0.5]}},
            }
        ]
    )
    a = m.sample_prior(200, seed=3)
    b = m.sample_prior(200, seed=3)
    np.testing.assert_array_equal(a, b)
    lo, hi = m.free_bounds()
    assert np.all(a >= lo) and np.all(a <= hi)
    assert all(np.isfinite(m.log_prior(t)) for t in a)
    free = SkyModel.build([{"name": "a", "shape": "point", "flux": 1.0}])
    with pytest.raises(ModelError):
        free.sample_prior(5, seed=1)


def test_fix_a_tied_parameter_unties_it():
    m = SkyModel.build(
        [
            {"name": "a", "shape": "gaussian", "flux": 1.0, "fwhm": 0.3},
            {"name": "b", "shape": "gaussian", "flux": 1.0, "fwhm": {"tie": "a.fwhm"}},
        ]
    )
    m.fix("b.fwhm")
    p = m.parameters["b.fwhm"]
    assert p.fixed and p.tie is None and p.value == 0.3
    with pytest.raises(ModelError):
        m.fix("c.fwhm")
    with pytest.raises(ModelError):
        m.component("c")


def test_example_models_load_and_round_trip():
    import glob
    import os

    root = os.path.join(os.path.dirname(__file__), "..", "models")
    files = sorted(glob.glob(os.path.join(root, "*.toml")))
    assert len(files) >= 4
    for f in files:
        try:
            m = uvfit.load_model(f)
        except ModelError as exc:
            if "not available in this installation" in str(exc):
                continue  # a shape whose module has not landed on this branch yet
            raise
        assert loads(m.to_toml()) == m, f
        u = np.linspace(-1e9, 1e9, 7)
        assert np.all(np.isfinite(m.visibilities(u, u[::-1] * 0.5)))


def test_tied_parameter_cannot_carry_a_prior():
    text = (
        'angular_unit = "mas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 1.0\nfwhm = 0.1\n'
        '[[component]]\nname = "b"\nshape = "gaussian"\nflux = 1.0\n'
        'fwhm = { tie = "a.fwhm", prior = { normal = [0.1, 0.01] } }\n'
    )
    with pytest.raises(ModelError, match="line 11.*tied"):
        loads(text, path="m.toml")


def test_double_member_bounds_come_from_the_member():
    m = SkyModel.build(
        [
            {
                "name": "d",
                "shape": "double",
                "member": "elliptical_gaussian",
                "flux": 1.0,
                "flux_ratio": 0.5,
                "separation": 0.1,
                "position_angle": 10.0,
                "fwhm_1": 0.1,
                "axis_ratio_1": 0.5,
                "position_angle_1": 0.0,
                "fwhm_2": 0.1,
                "axis_ratio_2": 0.5,
                "position_angle_2": 0.0,
            }
        ]
    )
    p = m.parameters["d.axis_ratio_2"]
    assert (p.min, p.max) == (0.0, 1.0)
    assert m.parameters["d.position_angle_1"].min == -math.inf


def test_double_of_modulated_rings_takes_the_member_settings():
    pytest.importorskip("uvfit.sky.shapes.ring", reason="ring shapes are on another branch until merged")
    spec = {
        "name": "d",
        "shape": "double",
        "member": "ring_modulated",
        "order": 2,
        "flux": 1.0,
        "flux_ratio": 0.8,
        "separation": 0.3,
        "position_angle": 100.0,
    }
    for k in (1, 2):
        spec.update(
            {
                f"diameter_{k}": 0.1 * k,
                f"blur_{k}": 0.02,
                f"amplitude_1_{k}": 0.2,
                f"angle_1_{k}": 30.0 * k,
                f"amplitude_2_{k}": 0.1,
                f"angle_2_{k}": -40.0,
            }
        )
    m = SkyModel.build([spec])
    assert "d.amplitude_2_2" in m.free_names
    assert (m.parameters["d.amplitude_2_1"].min, m.parameters["d.amplitude_2_1"].max) == (0.0, 0.5)
    assert loads(m.to_toml()) == m
    from tests.test_sky_model_shapes import fd_check

    fd_check(m)
    # blur left out: fixed at 0
    spec2 = {k: v for k, v in spec.items() if not k.startswith("blur")}
    m2 = SkyModel.build([spec2])
    assert m2.parameters["d.blur_1"].fixed and m2.parameters["d.blur_1"].value == 0.0
    # a bad member setting is reported on its line
    text = (
        'angular_unit = "mas"\n[[component]]\nname = "d"\nshape = "double"\nmember = "ring_modulated"\n'
        "order = -1\nflux = 1.0\n"
    )
    with pytest.raises(ModelError, match="line 6.*order"):
        loads(text, path="m.toml")


def test_to_dict_is_json():
    import json

    from uvfit.outputs import to_json

    m = loads(EXAMPLE)
    d = json.loads(to_json(m.to_dict()))  # standard-library JSON parser
    assert d["angular_unit"] == "mas" and d["free_names"] == m.free_names
    fwhm = d["components"][1]["parameters"]["fwhm"]
    assert fwhm["value"] == 0.1 and fwhm["min"] == 0.0 and fwhm["max"] is None and fwhm["unit"] == "mas"

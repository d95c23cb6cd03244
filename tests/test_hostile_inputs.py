"""Hostile and broken input files, built here: each is refused with one clear line (exit code 2)
or its bad rows are flagged with a count and a reason. Expected outcomes: uvfit's own rules
(README "Cautions"); the YAML alias expansion and FITS block layout are common practice."""

import numpy as np
import pytest
from helpers.arrays import observe

from uvfit.cli import main
from uvfit.data.table import write_table
from uvfit.errors import ModelError
from uvfit.sky.modelfile import loads
from uvfit.stats.closures.check import _judge


def _rows(n=12, **change):
    rng = np.random.default_rng(1)
    names = ["AA", "BB", "CC", "DD"]
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]]
    s1 = [pairs[i % 6][0] for i in range(n)]
    s2 = [pairs[i % 6][1] for i in range(n)]
    t = 60000.0 + np.arange(n) // 6 * 0.01
    kw = dict(u=rng.normal(0, 1e9, n), v=rng.normal(0, 1e9, n), station1=s1, station2=s2, time=t)
    kw.update(change)
    return observe(
        kw.pop("u"),
        kw.pop("v"),
        kw.pop("station1"),
        kw.pop("station2"),
        kw.pop("time"),
        frequency=kw.pop("frequency", 2.3e11),
        sigma=0.01,
        vis=np.ones(n) + 0j,
        **kw,
    )


class _Result:
    def __init__(self, exit_code, output):
        self.exit_code, self.output = exit_code, output


def _info(path):
    """Run `uvfit info PATH` through the entry point (which turns errors into exit code 2)."""
    import contextlib
    import io

    out = io.StringIO()
    code = 0
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
        try:
            main(["info", str(path)])
        except SystemExit as exc:
            code = exc.code
    text = out.getvalue()
    if code == 2:
        assert len(text.strip().splitlines()) == 1, text
    return _Result(code, text)


def _ecsv(tmp_path, name, vset):
    path = tmp_path / name
    write_table(vset, path)
    return path


BAD_FREQUENCY = [0.0, -1.0, np.nan, np.inf, -np.inf, -2.3e11]


@pytest.mark.parametrize("f", BAD_FREQUENCY)
def test_bad_frequency_refused(tmp_path, f):
    freq = np.full(12, 2.3e11)
    freq[3] = f
    vs = _rows(frequency=freq)
    vs.frequency = freq
    path = _ecsv(tmp_path, "f.ecsv", vs)
    res = _info(path)
    assert res.exit_code == 2, res.output
    assert "frequency" in res.output and "f.ecsv" in res.output and "Traceback" not in res.output


FLAGGED = [
    ("u", np.nan, "non-finite u"),
    ("u", np.inf, "non-finite u"),
    ("v", np.nan, "non-finite u"),
    ("v", -np.inf, "non-finite u"),
    ("u", 1e30, "above"),
    ("v", -1e30, "above"),
    ("u", 2e15, "above"),
    ("time", np.nan, "non-finite time"),
    ("time", np.inf, "non-finite time"),
]


@pytest.mark.parametrize("column,value,reason", FLAGGED)
def test_bad_values_flagged_with_reason(tmp_path, column, value, reason):
    vs = _rows()
    getattr(vs, column)[[2, 5]] = value
    path = _ecsv(tmp_path, "x.ecsv", vs)
    from uvfit.data.io import read

    got = read(path)
    reasons = got.meta["flagged_reasons"]
    assert sum(n for k, n in reasons.items() if reason in k) == 2
    assert got.flag.sum() == 2
    res = _info(path)
    assert res.exit_code == 0 and reason in res.output


@pytest.mark.parametrize("n_auto", [1, 2, 5])
def test_autocorrelations_flagged(tmp_path, n_auto):
    vs = _rows()
    vs.station2[:n_auto] = vs.station1[:n_auto]
    from uvfit.data.io import read

    got = read(_ecsv(tmp_path, "a.ecsv", vs))
    assert got.meta["flagged_reasons"]["autocorrelation (station1 = station2)"] == n_auto


@pytest.mark.parametrize("n_rep", [1, 3, 6])
def test_repeated_rows_flagged(tmp_path, n_rep):
    vs = _rows()
    path = tmp_path / "d.ecsv"
    write_table(vs, path)
    lines = path.read_text().splitlines()
    body = [l for l in lines if not l.startswith("#")]
    path.write_text("\n".join(lines + body[1 : 1 + n_rep]) + "\n")
    from uvfit.data.io import read

    got = read(path)
    assert sum(v for k, v in got.meta["flagged_reasons"].items() if "repeat" in k) == n_rep


ALIASES = [
    "# a: &x [1, 2]\n# b: [*x, *x]\n",
    "# a: &anchor 1\n",
    "# - *ref\n",
    "# {k: *v}\n",
    "# b: [*x,*x,*x,*x]\n",
]


@pytest.mark.parametrize("extra", ALIASES)
def test_yaml_aliases_refused(tmp_path, extra):
    vs = _rows()
    path = tmp_path / "y.ecsv"
    write_table(vs, path)
    text = path.read_text().splitlines(keepends=True)
    text.insert(2, extra)
    path.write_text("".join(text))
    res = _info(path)
    assert res.exit_code == 2 and "anchor or alias" in res.output and "y.ecsv" in res.output


def test_huge_header_refused(tmp_path):
    vs = _rows()
    path = tmp_path / "h.ecsv"
    write_table(vs, path)
    text = path.read_text().splitlines(keepends=True)
    text.insert(2, "# pad: x\n" * 500000)
    path.write_text("".join(text))
    res = _info(path)
    assert res.exit_code == 2 and "header is larger" in res.output


CONTROL = ["\x1b[31mAA", "A\x07A", "A\x00B", "A\rB", "\x9bC"]


@pytest.mark.parametrize("name", CONTROL)
def test_control_characters_escaped(tmp_path, name):
    vs = _rows(station1=[name] * 12)
    res = _info(_ecsv(tmp_path, "c.ecsv", vs))
    assert res.exit_code == 0, res.output
    bad = [c for c in res.output if not c.isprintable() and c != "\n"]
    assert not bad


MODELS = [
    ('shape="shell"\ninner_radius=2\nouter_radius=1', "inner_radius"),
    ('shape="shell"\ninner_radius=1.0001\nouter_radius=1', "inner_radius"),
    ('shape="gaussian"\nfwhm=-1', "fwhm"),
    ('shape="disk"\ndiameter=-0.1', "diameter"),
    ('shape="elliptical_gaussian"\nfwhm=1\naxis_ratio=1.5\nposition_angle=0', "axis_ratio"),
    ('shape="elliptical_gaussian"\nfwhm=1\naxis_ratio=-0.5\nposition_angle=0', "axis_ratio"),
]


@pytest.mark.parametrize("body,key", MODELS)
def test_unphysical_models_refused(body, key):
    with pytest.raises(ModelError) as exc:
        loads('angular_unit="mas"\n[[component]]\nname="a"\nflux=1\n' + body + "\n")
    assert key in str(exc.value) and "'a'" in str(exc.value)


@pytest.mark.parametrize("chi2", [np.nan, np.inf, -np.inf, None])
def test_non_finite_chi2_is_no_verdict(chi2):
    ok, words = _judge("closure phases", chi2, 10, False)
    assert ok == "not finite" and "no verdict" in words  # never "consistent"


def _uvfits(tmp_path, edit=None, name="s.uvfits"):
    """A UVFITS file from uvfit's writer, its antenna table changed by ``edit(data)``."""
    from astropy.io import fits

    from uvfit.data.io import write

    path = tmp_path / name
    write(_rows(), path)
    if edit is not None:
        with fits.open(path, mode="update") as hdul:
            for hdu in hdul[1:]:
                if hdu.header.get("EXTNAME", "").strip() == "AIPS AN":
                    edit(hdu.data)
    return path


ANTENNA_EDITS = [
    ("twice", lambda d: d["NOSTA"].__setitem__(1, d["NOSTA"][0])),
    ("twice", lambda d: d["NOSTA"].__setitem__(3, d["NOSTA"][2])),
    ("name", lambda d: d["ANNAME"].__setitem__(1, d["ANNAME"][0])),
    ("name", lambda d: d["ANNAME"].__setitem__(3, d["ANNAME"][0])),
]


@pytest.mark.parametrize("what,edit", ANTENNA_EDITS)
def test_ambiguous_antenna_table_refused(tmp_path, what, edit):
    res = _info(_uvfits(tmp_path, edit))
    assert res.exit_code == 2 and what in res.output and "row" in res.output


@pytest.mark.parametrize("cut", [10, 100, 1000, 2000, 2880, 4000, 6000, 9000])
def test_truncated_uvfits_refused(tmp_path, cut):
    path = _uvfits(tmp_path)
    data = path.read_bytes()
    cut_at = len(data) - cut
    path.write_bytes(data[:cut_at])
    res = _info(path)
    # FITS files are whole 2880-byte blocks (FITS standard): a file cut anywhere is refused
    assert res.exit_code == 2 and "truncated" in res.output, res.output


# ---- station names: bounded memory per row ----------------------------------------------------


@pytest.mark.parametrize("length,ok", [(64, True), (65, False), (2000, False)])
def test_station_name_length_bounds_memory(tmp_path, length, ok):
    """Each row holds its two names as fixed-width strings (4 bytes a character, numpy's 'U'
    dtype, from numpy's documentation); names of at most 64 characters cap that at 512 bytes a
    row, whatever the file."""
    from uvfit.data.io import read

    name = "S" * length
    vs = _rows(n=30, station1=[name] * 30)
    path = _ecsv(tmp_path, "n.ecsv", vs)
    if ok:
        got = read(path)
        per_row = (got.station1.nbytes + got.station2.nbytes) / got.n
        assert per_row <= 2 * 64 * 4
    else:
        res = _info(path)
        assert res.exit_code == 2 and "n.ecsv" in res.output
        assert "characters" in res.output or "bytes long" in res.output  # the name, or its row


def test_one_long_line_refused_before_the_table_is_read(tmp_path):
    """One row with a 3000-character station name among many short rows: refused from the line
    lengths alone (the table would otherwise be as wide as that name on every row)."""
    vs = _rows(n=600)
    path = _ecsv(tmp_path, "w.ecsv", vs)
    lines = path.read_text().splitlines()
    k = next(i for i, line in enumerate(lines) if not line.startswith("#")) + 7  # row 6: AA-BB
    lines[k] = lines[k].replace("AA", "Q" * 3000, 1)
    path.write_text("\n".join(lines) + "\n")
    res = _info(path)
    assert res.exit_code == 2 and f"line {k + 1}" in res.output and "bytes long" in res.output


# ---- ring modulation: brightness never negative -----------------------------------------------

RINGS = [
    ((0.4, 0.4), (0.0, 0.0)),  # harmonics that do not line up: positive everywhere
    ((0.4, 0.4), (0.0, 90.0)),
    ((0.3, 0.3, 0.45), (10.0, 70.0, -20.0)),
    ((0.25, 0.25), (0.0, 0.0)),  # sum 0.5: always non-negative
    ((0.49,), (33.0,)),
    ((0.2, 0.2, 0.2), (0.0, 0.0, 0.0)),
]


@pytest.mark.parametrize("amps,angles", RINGS)
def test_ring_modulation_refused_exactly_when_brightness_negative(amps, angles):
    """The brightness on the ring, 1 + 2 sum_k a_k cos(k (psi - angle_k)) (Johnson et al. 2020,
    Sci. Adv. 6, eaaz1310), minimised over psi by scipy (bounded search from a dense start)."""
    from scipy.optimize import minimize_scalar

    def level(psi):
        return 1 + 2 * sum(a * np.cos(k * (psi - np.deg2rad(t))) for k, (a, t) in enumerate(zip(amps, angles), 1))

    grid = np.linspace(0, 2 * np.pi, 97)
    start = grid[np.argmin(level(grid))]
    best = minimize_scalar(level, bounds=(start - 0.07, start + 0.07), method="bounded")
    negative = best.fun < -1e-9
    body = f'angular_unit="mas"\n[[component]]\nname="a"\nshape="ring_modulated"\nflux=1\ndiameter=0.5\norder={len(amps)}\n'
    for k, (a, t) in enumerate(zip(amps, angles), 1):
        body += f"amplitude_{k}={a}\nangle_{k}={t}\n"
    if negative:
        with pytest.raises(ModelError) as exc:
            loads(body)
        assert "'a'" in str(exc.value) and "amplitude_" in str(exc.value) and "negative" in str(exc.value)
    else:
        loads(body)


# ---- the demo's answer never contradicts its comparison ---------------------------------------


def _answer(fap, n_sim, n_exceed, preferred):
    from uvfit.demo import headline

    pair = {k: {"value": 1.0, "error": 0.1} for k in ("pair.separation", "pair.position_angle", "pair.flux_ratio")}
    comparison = {
        "preferred": preferred,
        "models": [
            {"name": "one"},
            {"name": "two", "false_alarm_probability": fap, "n_simulations": n_sim, "n_exceeding": n_exceed},
        ],
    }
    fit_one = {"parameters": {"source.fwhm": {"value": 0.3, "error": 0.01}}}
    return headline({"parameters": pair}, fit_one, comparison)


@pytest.mark.parametrize("n_sim", [1, 2, 5, 10])
def test_demo_answer_undecided_with_too_few_simulations(n_sim):
    """None of N simulations reached the improvement, but N < 20 cannot show a false-alarm
    probability below 5% (the bound 1/(N+1) > 0.05; common practice): the comparison says
    'undecided', so the answer must not say that one component suffices."""
    text, numbers = _answer(1.0 / (n_sim + 1), n_sim, 0, "one")
    assert text.startswith("undecided") and "suffices" not in text and numbers["undecided"] is True


def test_demo_answer_decided_with_enough_simulations():
    text, numbers = _answer(1.0 / 101, 100, 0, "two")
    assert text.startswith("two components") and numbers["undecided"] is False
    text, numbers = _answer(0.4, 100, 40, "one")
    assert text.startswith("one component suffices") and numbers["undecided"] is False

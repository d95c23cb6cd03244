"""Hostile inputs built on the spot, and a runner that feeds them all to the command line in one
process under a memory limit (used by tests/test_hostile_sandbox.py).

Each probe is a function ``build(work) -> args``: it writes its bad files into the folder ``work``
(which already holds copies of the demo data and models) and returns the command line. The
runner gives every probe a fresh ``work`` folder and an ``outside`` folder beside it, snapshots
both, runs ``uvfit ARGS`` in ``work`` and records the exit code, stderr, stdout, the files that
changed, the time taken and the growth of the peak memory. The expectations (exit code 2, one
line naming the file and the problem) are the project's own rules (DEVELOPERS.md, "Errors and
outputs"); the FITS block layout and the YAML alias syntax are common practice.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import resource
import shutil
import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "uvfit" / "demo_data"
SENTINEL = b"precious: not made by uvfit\n"


@dataclass
class Probe:
    name: str
    build: Callable[[Path], list]
    #: substrings the one-line message must hold (a file or option name, and the problem); for
    #: an accepted input, substrings of stdout + stderr
    expect: tuple
    #: None: refused (exit code 2); else the outputs (paths in ``work``) an accepted run writes
    outputs: tuple | None = None


PROBES: dict[str, Probe] = {}


def probe(name, *expect, outputs=None):
    def register(build):
        PROBES[name] = Probe(name, build, tuple(expect), None if outputs is None else tuple(outputs))
        return build

    return register


# ---- file builders ----------------------------------------------------------------------------


def demo_rows(n=24, long_name=None, **change):
    """A small invented observation (4 stations, 6 baselines) as a VisibilitySet."""
    from helpers.arrays import observe

    rng = np.random.default_rng(3)
    names = ["AA", "BB", "CC", "DD"] if long_name is None else [long_name + "A", long_name + "B", "CC", "DD"]
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]]
    kw = dict(
        u=rng.normal(0, 1e9, n),
        v=rng.normal(0, 1e9, n),
        time=60000.0 + np.arange(n) // 6 * 0.01,
        frequency=np.full(n, 2.3e11),
        station1=np.array([pairs[i % 6][0] for i in range(n)]),
        station2=np.array([pairs[i % 6][1] for i in range(n)]),
        vis=np.ones(n) + 0j,
        sigma=np.full(n, 0.01),
    )
    kw.update(change)
    return observe(
        kw.pop("u"),
        kw.pop("v"),
        kw.pop("station1"),
        kw.pop("station2"),
        kw.pop("time"),
        frequency=kw.pop("frequency"),
        sigma=kw.pop("sigma"),
        vis=kw.pop("vis"),
        **kw,
    )


def ecsv(work, name, vset=None):
    from uvfit.data.table import write_table

    path = work / name
    write_table(demo_rows() if vset is None else vset, path)
    return path


def edit_ecsv_body(path, edit):
    """Apply ``edit(list of data lines)`` to an ECSV file; the header stays as written."""
    lines = path.read_text().splitlines()
    head = [line for line in lines if line.startswith("#")]
    body = [line for line in lines if not line.startswith("#")]
    path.write_text("\n".join(head + edit(body)) + "\n")
    return path


def uvfits(work, name, vset=None):
    from uvfit.data.io import write

    path = work / name
    write(demo_rows() if vset is None else vset, path)
    return path


def toml_model(work, name, body, unit='angular_unit = "mas"\n'):
    (work / name).write_text(unit + body)
    return name


def component(shape, **values):
    lines = ["[[component]]", 'name = "a"', f'shape = "{shape}"']
    lines += [f"{k} = {v}" for k, v in values.items()]
    return "\n".join(lines) + "\n"


def fit_json(work, edit=None, name="fit.json"):
    """A copy of the fit JSON made once by the runner, changed by ``edit(dict)``."""
    data = json.loads((work.parent.parent / "_base" / "fit.json").read_text())
    if edit is not None:
        result = edit(data)
        data = result if isinstance(result, (dict, list)) else data
    (work / name).write_text(json.dumps(data))
    return name


# ---- data files -------------------------------------------------------------------------------

DATA = "uvd0917.uvfits"
ONE = "one.toml"


def _cut(src, dst, keep):
    raw = Path(src).read_bytes()
    Path(dst).write_bytes(raw[:keep] if keep >= 0 else raw[:keep])


@probe("uvfits-cut-half", "cut.uvfits", "truncated")
def _(work):
    raw = (work / DATA).read_bytes()
    (work / "cut.uvfits").write_bytes(raw[: len(raw) // 2 // 2880 * 2880])
    (work / "out").mkdir()
    return ["fit", "cut.uvfits", ONE, "--json", "out/r.json"]


@probe("uvfits-cut-1000", "cut.uvfits")
def _(work):
    raw = (work / DATA).read_bytes()
    (work / "cut.uvfits").write_bytes(raw[:-1000])
    return ["info", "cut.uvfits"]


@probe("uvfits-cut-block", "cut.uvfits")
def _(work):
    raw = (work / DATA).read_bytes()
    (work / "cut.uvfits").write_bytes(raw[:-2880])
    return ["closures", "cut.uvfits"]


@probe("uvfits-header-only", "h.uvfits")
def _(work):
    (work / "h.uvfits").write_bytes((work / DATA).read_bytes()[:2880])
    return ["info", "h.uvfits"]


@probe("uvfits-no-end-card", "e.uvfits", "header")
def _(work):
    (work / "e.uvfits").write_bytes(b"SIMPLE  =                    T" + b" " * (2880 * 3 - 30))
    return ["info", "e.uvfits"]


def _patch_card(raw, key, value):
    key = key.ljust(8).encode()
    for i in range(0, 2880 * 10, 80):
        if raw[i : i + 8] == key:
            card = (key + b"= " + value.rjust(20).encode()).ljust(80)
            return raw[:i] + card + raw[i + 80 :]
    raise KeyError(key)


@probe("uvfits-naxis-huge", "n.uvfits", "NAXIS")
def _(work):
    (work / "n.uvfits").write_bytes(_patch_card((work / DATA).read_bytes(), "NAXIS", "1000"))
    return ["info", "n.uvfits"]


@probe("uvfits-bitpix-7", "b.uvfits", "BITPIX")
def _(work):
    (work / "b.uvfits").write_bytes(_patch_card((work / DATA).read_bytes(), "BITPIX", "7"))
    return ["fit", "b.uvfits", ONE]


@probe("uvfits-gcount-huge", "g.uvfits")
def _(work):
    (work / "g.uvfits").write_bytes(_patch_card((work / DATA).read_bytes(), "GCOUNT", "999999999999"))
    return ["info", "g.uvfits"]


@probe("uvfits-odd-size", "o.uvfits")
def _(work):
    (work / "o.uvfits").write_bytes((work / DATA).read_bytes() + b"x" * 17)
    return ["info", "o.uvfits"]


@probe("uvfits-empty", "z.uvfits")
def _(work):
    (work / "z.uvfits").write_bytes(b"")
    return ["info", "z.uvfits"]


@probe("uvfits-random-bytes", "r.uvfits")
def _(work):
    (work / "r.uvfits").write_bytes(np.random.default_rng(5).bytes(2880 * 4))
    return ["info", "r.uvfits"]


@probe("uvfits-is-text", "t.uvfits")
def _(work):
    (work / "t.uvfits").write_text("these are not visibilities\n" * 200)
    return ["fit", "t.uvfits", ONE]


@probe("data-is-folder", "d.uvfits")
def _(work):
    (work / "d.uvfits").mkdir()
    return ["info", "d.uvfits"]


@probe("data-missing", "nothere.uvfits")
def _(work):
    return ["fit", "nothere.uvfits", ONE]


@probe("data-unknown-suffix", "x.dat")
def _(work):
    (work / "x.dat").write_text("1 2 3\n")
    return ["info", "x.dat"]


@probe("uvfits-long-station-names", "long.uvfits", "characters")
def _(work):
    """Station names of 2000 characters: refused before they are copied onto the rows."""
    from astropy.io import fits

    path = uvfits(work, "long.uvfits", demo_rows(n=600))
    with fits.open(path) as hdul:
        hdus = [h.copy() for h in hdul]
    for k, hdu in enumerate(hdus):
        if hdu.header.get("EXTNAME", "").strip() == "AIPS AN":
            cols = []
            for col in hdu.columns:
                if col.name == "ANNAME":
                    names = [f"{'S' * 1998}{i:02d}" for i in range(len(hdu.data))]
                    cols.append(fits.Column(name="ANNAME", format="2000A", array=np.array(names)))
                else:
                    cols.append(fits.Column(name=col.name, format=col.format, array=hdu.data[col.name]))
            new = fits.BinTableHDU.from_columns(cols, header=hdu.header)
            hdus[k] = new
    fits.HDUList(hdus).writeto(path, overwrite=True)
    return ["info", "long.uvfits"]


@probe("uvfits-station-number-twice", "s.uvfits", "station")
def _(work):
    from astropy.io import fits

    path = uvfits(work, "s.uvfits")
    with fits.open(path, mode="update") as hdul:
        for hdu in hdul[1:]:
            if hdu.header.get("EXTNAME", "").strip() == "AIPS AN":
                hdu.data["NOSTA"][1] = hdu.data["NOSTA"][0]
    return ["info", "s.uvfits"]


@probe("uvfits-station-name-twice", "s.uvfits", "station")
def _(work):
    from astropy.io import fits

    path = uvfits(work, "s.uvfits")
    with fits.open(path, mode="update") as hdul:
        for hdu in hdul[1:]:
            if hdu.header.get("EXTNAME", "").strip() == "AIPS AN":
                hdu.data["ANNAME"][2] = hdu.data["ANNAME"][0]
    return ["fit", "s.uvfits", ONE]


@probe("ecsv-alias-bomb", "y.ecsv", "alias")
def _(work):
    path = ecsv(work, "y.ecsv")
    lines = path.read_text().splitlines(keepends=True)
    bomb = ["# a0: &a0 [x, x, x, x, x, x, x, x, x]\n"]
    bomb += [f"# a{i}: &a{i} [{', '.join([f'*a{i - 1}'] * 9)}]\n" for i in range(1, 9)]
    path.write_text("".join(lines[:2] + bomb + lines[2:]))
    return ["info", "y.ecsv"]


@probe("ecsv-huge-header", "h.ecsv", "header")
def _(work):
    path = ecsv(work, "h.ecsv")
    lines = path.read_text().splitlines(keepends=True)
    path.write_text("".join(lines[:2] + ["# pad: " + "x" * 70 + "\n"] * 80000 + lines[2:]))
    return ["fit", "h.ecsv", ONE]


@probe("ecsv-missing-column", "m.ecsv", "sigma_jy")
def _(work):
    from astropy.table import Table

    path = ecsv(work, "m.ecsv")
    table = Table.read(path, format="ascii.ecsv")
    table.remove_column("sigma_jy")
    table.write(path, format="ascii.ecsv", overwrite=True)
    return ["info", "m.ecsv"]


@probe("ecsv-zero-frequency", "f.ecsv", "frequency")
def _(work):
    ecsv(work, "f.ecsv", demo_rows(frequency=np.zeros(24)))
    return ["fit", "f.ecsv", ONE]


@probe("ecsv-text-in-numbers", "t.ecsv")
def _(work):
    path = ecsv(work, "t.ecsv")
    edit_ecsv_body(path, lambda body: body[:3] + [" ".join(["abc"] * len(body[3].split()))] + body[4:])
    return ["info", "t.ecsv"]


@probe("ecsv-short-row", "t.ecsv")
def _(work):
    path = ecsv(work, "t.ecsv")
    edit_ecsv_body(path, lambda body: body[:3] + [" ".join(body[3].split()[:3])] + body[4:])
    return ["info", "t.ecsv"]


@probe("ecsv-binary", "b.ecsv")
def _(work):
    (work / "b.ecsv").write_bytes(b"# %ECSV 1.0\n" + np.random.default_rng(2).bytes(5000))
    return ["info", "b.ecsv"]


@probe("ecsv-all-flagged", "a.ecsv", "flag")
def _(work):
    ecsv(work, "a.ecsv", demo_rows(flag=np.ones(24, bool)))
    return ["fit", "a.ecsv", ONE]


@probe("ecsv-all-uv-nan", "a.ecsv")
def _(work):
    ecsv(work, "a.ecsv", demo_rows(u=np.full(24, np.nan)))
    return ["fit", "a.ecsv", ONE]


@probe("ecsv-all-sigma-zero", "a.ecsv", "weight")
def _(work):
    ecsv(work, "a.ecsv", demo_rows(sigma=np.zeros(24)))
    return ["fit", "a.ecsv", ONE]


@probe("ecsv-long-line", "l.ecsv")
def _(work):
    """One row holds a station name of 5000 characters and the other 20000 rows short ones: the
    name would be copied (as a fixed-width string) onto every row."""
    path = ecsv(work, "l.ecsv", demo_rows(n=20000))
    edit_ecsv_body(path, lambda body: body[:2] + [body[2].replace(" AA ", " " + "Q" * 5000 + " ", 1)] + body[3:])
    return ["info", "l.ecsv"]


@probe("ecsv-long-station-names", "l.ecsv", "characters")
def _(work):
    ecsv(work, "l.ecsv", demo_rows(long_name="N" * 300))
    return ["info", "l.ecsv"]


@probe("ecsv-empty-table", "e.ecsv")
def _(work):
    path = ecsv(work, "e.ecsv")
    edit_ecsv_body(path, lambda body: body[:1])
    return ["fit", "e.ecsv", ONE]


# ---- model files ------------------------------------------------------------------------------


@probe("model-nested-tables", "deep.toml", "nested")
def _(work):
    toml_model(work, "deep.toml", component("point", flux="{x = " * 3000 + "1" + "}" * 3000))
    return ["fit", DATA, "deep.toml"]


@probe("model-nested-arrays", "deep.toml", "nested")
def _(work):
    toml_model(work, "deep.toml", component("point", flux="[" * 3000 + "1" + "]" * 3000))
    return ["sample", DATA, "deep.toml", "--max-steps", "5"]


@probe("model-nested-moderate", "deep.toml")
def _(work):
    toml_model(work, "deep.toml", component("point", flux="[" * 400 + "1" + "]" * 400))
    return ["fit", DATA, "deep.toml"]


@probe("model-ring-modulation-negative", "'a'", "amplitude_")
def _(work):
    body = component(
        "ring_modulated",
        flux=1,
        diameter=0.5,
        blur=0.05,
        order=2,
        amplitude_1=0.4,
        angle_1=0,
        amplitude_2=0.4,
        angle_2=90,
    )
    toml_model(work, "ring.toml", body)
    return ["fit", DATA, "ring.toml"]


@probe("model-ring-modulation-order3", "'a'", "negative")
def _(work):
    body = component(
        "ring_modulated",
        flux=1,
        diameter=0.5,
        blur=0,
        order=3,
        amplitude_1=0.3,
        angle_1=10,
        amplitude_2=0.3,
        angle_2=70,
        amplitude_3=0.45,
        angle_3=-20,
    )
    toml_model(work, "ring.toml", body)
    return ["fit", DATA, "ring.toml"]


@probe("model-shell-inside-out", "'a'", "inner_radius")
def _(work):
    toml_model(work, "s.toml", component("shell", flux=1, inner_radius=0.4, outer_radius=0.2))
    return ["fit", DATA, "s.toml"]


@probe("model-negative-fwhm", "'a'", "fwhm")
def _(work):
    toml_model(work, "g.toml", component("gaussian", flux=1, fwhm=-0.3))
    return ["fit", DATA, "g.toml"]


@probe("model-axis-ratio-above-1", "'a'", "axis_ratio")
def _(work):
    toml_model(work, "g.toml", component("elliptical_gaussian", flux=1, fwhm=0.3, axis_ratio=2, position_angle=0))
    return ["fit", DATA, "g.toml"]


@probe("model-unknown-shape", "blob")
def _(work):
    toml_model(work, "u.toml", component("blob", flux=1))
    return ["fit", DATA, "u.toml"]


@probe("model-no-components", "n.toml", "component")
def _(work):
    toml_model(work, "n.toml", "")
    return ["fit", DATA, "n.toml"]


@probe("model-not-utf8", "b.toml", "UTF-8")
def _(work):
    (work / "b.toml").write_bytes(b"\xff\xfe\x00bad")
    return ["fit", DATA, "b.toml"]


@probe("model-syntax-error", "x.toml", "TOML")
def _(work):
    toml_model(work, "x.toml", "[[component]\nname = \n")
    return ["fit", DATA, "x.toml"]


@probe("model-min-above-max", "'a'", "flux")
def _(work):
    toml_model(work, "m.toml", component("point", flux="{ value = 1, min = 2, max = 0 }"))
    return ["fit", DATA, "m.toml"]


@probe("model-value-outside-bounds", "'a'", "fwhm")
def _(work):
    toml_model(work, "m.toml", component("gaussian", flux=1, fwhm="{ value = 9, min = 0, max = 1 }"))
    return ["fit", DATA, "m.toml"]


@probe("model-nan-value", "'a'", "flux")
def _(work):
    toml_model(work, "m.toml", component("point", flux="nan"))
    return ["fit", DATA, "m.toml"]


@probe("model-inf-value", "'a'", "fwhm")
def _(work):
    toml_model(work, "m.toml", component("gaussian", flux=1, fwhm="inf"))
    return ["fit", DATA, "m.toml"]


@probe("model-two-components-one-name", "m.toml", "'a'")
def _(work):
    toml_model(work, "m.toml", component("point", flux=1) + component("point", flux=2))
    return ["fit", DATA, "m.toml"]


@probe("model-tie-cycle", "m.toml", "tie")
def _(work):
    body = component("gaussian", flux=1, fwhm='{ value = 0.3, tie = "b.fwhm" }')
    body += component("gaussian", flux=1, fwhm='{ value = 0.3, tie = "a.fwhm" }').replace('"a"', '"b"', 1)
    toml_model(work, "m.toml", body)
    return ["fit", DATA, "m.toml"]


@probe("model-tie-unknown", "m.toml", "tie")
def _(work):
    toml_model(work, "m.toml", component("gaussian", flux=1, fwhm='{ value = 0.3, tie = "zz.fwhm" }'))
    return ["fit", DATA, "m.toml"]


@probe("model-bad-unit", "m.toml", "angular_unit")
def _(work):
    toml_model(work, "m.toml", component("point", flux=1), unit='angular_unit = "furlong"\n')
    return ["fit", DATA, "m.toml"]


@probe("model-is-data", "uvd0917.uvfits")
def _(work):
    return ["fit", DATA, DATA]


# ---- option values ----------------------------------------------------------------------------


@probe("option-systematic-nan", "--systematic", "finite")
def _(work):
    return ["fit", DATA, ONE, "--systematic", "nan"]


@probe("option-systematic-inf", "--systematic", "finite")
def _(work):
    return ["closures", DATA, "--systematic", "inf"]


@probe("option-seed-negative", "--seed")
def _(work):
    return ["fit", DATA, ONE, "--seed", "-1"]


@probe("option-redshift-nan", "--redshift")
def _(work):
    return ["fit", DATA, ONE, "--redshift", "nan"]


@probe("option-bootstrap-negative", "--bootstrap")
def _(work):
    return ["compare", DATA, ONE, "two.toml", "--bootstrap", "-1"]


@probe("option-starts-zero", "--starts")
def _(work):
    return ["fit", DATA, ONE, "--starts", "0"]


@probe("option-uv-range-empty", "uv distance >= 1e+12")
def _(work):
    return ["fit", DATA, ONE, "--min-uv", "1e12"]


@probe("option-unknown-station", "ZZZZ")
def _(work):
    return ["fit", DATA, ONE, "--stations", "ZZZZ,FELL"]


@probe("option-time-range-reversed", "time range ends")
def _(work):
    return ["fit", DATA, ONE, "--time-range", "2030-01-02T00:00", "2030-01-01T00:00"]


@probe("option-channels-garbage", "channel list")
def _(work):
    return ["fit", DATA, ONE, "--channels", "a-b"]


@probe("option-average-negative", "averaging time")
def _(work):
    return ["fit", DATA, ONE, "--average", "-5"]


@probe("option-walkers-one", "--walkers")
def _(work):
    return ["sample", DATA, ONE, "--walkers", "1", "--max-steps", "5"]


@probe("option-max-evaluations-zero", "--max-evaluations")
def _(work):
    return ["fit", DATA, ONE, "--max-evaluations", "0"]


# ---- outputs ----------------------------------------------------------------------------------


@probe("output-exists", "r.json", "--force")
def _(work):
    (work / "r.json").write_bytes(SENTINEL)
    return ["fit", DATA, ONE, "--json", "r.json"]


@probe("output-twice", "x.out")
def _(work):
    return ["fit", DATA, ONE, "--json", "x.out", "--save-model", "x.out"]


@probe("output-is-input", "one.toml")
def _(work):
    return ["fit", DATA, ONE, "--json", "one.toml", "--force"]


@probe("output-folder-missing", "nowhere")
def _(work):
    return ["fit", DATA, ONE, "--json", "nowhere/r.json"]


@probe("output-folder-is-file", "plain")
def _(work):
    (work / "plain").write_bytes(SENTINEL)
    return ["fit", DATA, ONE, "--json", "plain/r.json"]


@probe("output-plot-numbers-same", "p.png")
def _(work):
    return ["plot", DATA, "--fit", fit_json(work), "--kind", "uv", "-o", "p.png", "--numbers", "p.png"]


@probe("output-through-link-outside", "l.json")
def _(work):
    os.symlink(work.parent / "outside" / "keep.json", work / "l.json")
    return ["info", DATA, "--json", "l.json"]


@probe("output-chain-is-json", "c.out")
def _(work):
    return ["sample", DATA, ONE, "--chain", "c.out", "--json", "c.out", "--max-steps", "5"]


@probe("output-name-too-long", "bytes long")
def _(work):
    return ["fit", DATA, ONE, "--json", "x" * 250 + ".json"]


@probe("output-report-name-too-long", "bytes long")
def _(work):
    fit_json(work)
    return ["report", DATA, "--fit", "fit.json", "-o", "r" * 300 + ".html"]


# ---- uvfit's own outputs read back ------------------------------------------------------------


@probe("fit-json-not-json", "fit.json")
def _(work):
    (work / "fit.json").write_text("{ not json")
    return ["report", DATA, "--fit", "fit.json", "-o", "r.html"]


@probe("fit-json-list", "fit.json")
def _(work):
    (work / "fit.json").write_text("[1, 2, 3]")
    return ["plot", DATA, "--fit", "fit.json", "--kind", "radial", "-o", "p.png"]


@probe("fit-json-no-model", "fit.json", "model_toml")
def _(work):
    fit_json(work, lambda d: d.pop("model_toml"))
    return ["plot", DATA, "--fit", "fit.json", "--kind", "sky", "-o", "p.png"]


@probe("fit-json-model-garbage", "fit.json")
def _(work):
    fit_json(work, lambda d: d.__setitem__("model_toml", "[[component]]\nshape = 5\n"))
    return ["report", DATA, "--fit", "fit.json", "-o", "r.html"]


@probe("fit-json-parameters-string", "fit.json")
def _(work):
    fit_json(work, lambda d: d.__setitem__("parameters", "flux"))
    return ["report", DATA, "--fit", "fit.json", "-o", "r.html"]


@probe("fit-json-value-nan-text", "fit.json")
def _(work):
    def edit(d):
        for p in d["parameters"].values():
            p["value"] = "NaN-ish"

    fit_json(work, edit)
    return ["report", DATA, "--fit", "fit.json", "-o", "r.html"]


@probe("fit-json-deeply-nested", "fit.json")
def _(work):
    (work / "fit.json").write_text("[" * 100000 + "]" * 100000)
    return ["report", DATA, "--fit", "fit.json", "-o", "r.html"]


@probe("fit-json-huge-number", "fit.json")
def _(work):
    def edit(d):
        for p in d["parameters"].values():
            p["value"] = 10**400

    fit_json(work, edit)
    return ["plot", DATA, "--fit", "fit.json", "--kind", "radial", "-o", "p.png"]


@probe("fit-json-selection-tampered", "fit.json")
def _(work):
    fit_json(work, lambda d: d.__setitem__("selection", {"min_uv": "far"}))
    return ["plot", DATA, "--fit", "fit.json", "--kind", "uv", "-o", "p.png"]


@probe("posterior-json-tampered", "post.json")
def _(work):
    fit_json(work)
    (work / "post.json").write_text(json.dumps({"parameters": {"source.flux": {"median": "x"}}, "converged": "?"}))
    return ["report", DATA, "--fit", "fit.json", "--posterior", "post.json", "-o", "r.html"]


@probe("posterior-json-list", "post.json")
def _(work):
    fit_json(work)
    (work / "post.json").write_text("[]")
    return ["report", DATA, "--fit", "fit.json", "--posterior", "post.json", "-o", "r.html"]


@probe("compare-json-garbage", "cmp.json")
def _(work):
    fit_json(work)
    (work / "cmp.json").write_text(json.dumps({"models": 5}))
    return ["report", DATA, "--fit", "fit.json", "--compare", "cmp.json", "-o", "r.html"]


@probe("chain-not-hdf5", "c.h5")
def _(work):
    fit_json(work)
    (work / "c.h5").write_bytes(SENTINEL * 100)
    return ["report", DATA, "--fit", "fit.json", "--chain", "c.h5", "-o", "r.html"]


def _empty_chain(path, names=("source.flux", "source.east", "source.north", "source.fwhm")):
    import h5py

    with h5py.File(path, "w") as f:
        g = f.create_group("uvfit_chain")
        g.attrs["uvfit_names"] = json.dumps(list(names))
        g.attrs["uvfit_seed"] = 0
        g.attrs["uvfit_meta"] = "{}"
        g.attrs["iteration"] = 0
        g.attrs["nwalkers"] = 8
        g.attrs["ndim"] = len(names)
        g.attrs["has_blobs"] = False
        g.create_dataset("chain", (0, 8, len(names)), maxshape=(None, 8, len(names)), dtype=np.float64)
        g.create_dataset("log_prob", (0, 8), maxshape=(None, 8), dtype=np.float64)
        g.create_dataset("accepted", data=np.zeros(8))


@probe("chain-empty-report", "c.h5", "empty")
def _(work):
    fit_json(work)
    _empty_chain(work / "c.h5")
    return ["report", DATA, "--fit", "fit.json", "--chain", "c.h5", "-o", "r.html"]


@probe("chain-empty-resume", "c.h5", "empty")
def _(work):
    _empty_chain(work / "c.h5")
    return ["sample", DATA, ONE, "--chain", "c.h5", "--resume", "--max-steps", "4", "--walkers", "8"]


# ---- batch manifests --------------------------------------------------------------------------


def _manifest(work, body):
    (work / "m.toml").write_text('[defaults]\noutput_dir = "out"\n\n' + body)
    return "m.toml"


@probe("batch-name-escapes", "m.toml", "name")
def _(work):
    return ["batch", _manifest(work, f'[[job]]\nname = "../outside/keep"\ndata = "{DATA}"\nmodel = "{ONE}"\n')]


@probe("batch-nested", "m.toml", "nested")
def _(work):
    (work / "m.toml").write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    return ["batch", "m.toml"]


@probe("batch-data-number", "m.toml", "data")
def _(work):
    return ["batch", _manifest(work, f'[[job]]\nname = "a"\ndata = 5\nmodel = "{ONE}"\n')]


@probe("batch-workers-zero", "--workers")
def _(work):
    return ["batch", _manifest(work, f'[[job]]\nname = "a"\ndata = "{DATA}"\nmodel = "{ONE}"\n'), "--workers", "0"]


@probe("batch-no-jobs", "m.toml", "no jobs")
def _(work):
    return ["batch", _manifest(work, "")]


@probe("batch-unknown-key", "m.toml", "unknown key")
def _(work):
    return ["batch", _manifest(work, f'[[job]]\nname = "a"\ndata = "{DATA}"\nmodel = "{ONE}"\nwalkerz = 3\n')]


# ---- sizes asked for that would exhaust memory or time -----------------------------------------


@probe("option-channel-range-huge", "channel list", "more than")
def _(work):
    return ["fit", DATA, ONE, "--channels", "0-999999999"]


@probe("option-walkers-huge", "walkers", "GiB")
def _(work):
    return ["sample", DATA, ONE, "--walkers", "1000000000", "--max-steps", "2"]


@probe("option-max-steps-huge", "max_steps", "GiB")
def _(work):
    return ["sample", DATA, ONE, "--walkers", "8", "--max-steps", "1000000000000"]


@probe("model-ring-order-huge", "r.toml", "order")
def _(work):
    toml_model(work, "r.toml", component("ring_modulated", flux=1, diameter=0.5, order=10**9))
    return ["fit", DATA, "r.toml"]


@probe("option-profile-points-huge", "--points", "at most")
def _(work):
    return ["profile", DATA, ONE, "--parameter", "source.fwhm", "--points", "1000000000"]


@probe("option-profile-unknown-parameter", "nope.x", "not free", "component.parameter")
def _(work):
    return ["profile", DATA, ONE, "--parameter", "nope.x"]


ARRAY = DEMO.parent.parent / "examples" / "demo" / "array.toml"
SIMULATE = ["--ra", "09h00m", "--dec", "20d", "--start", "2027-03-01T02:00", "--frequency", "22GHz"]


@probe("simulate-channels-huge", "visibilities", "channels")
def _(work):
    shutil.copy(ARRAY, work / "array.toml")
    return ["simulate", "array.toml", ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "1h", "--channels", "100000000"]


@probe("simulate-integrations-huge", "integrations")
def _(work):
    shutil.copy(ARRAY, work / "array.toml")
    return ["simulate", "array.toml", ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "100000h", "--integration", "1s"]


@probe("simulate-station-name-long", "array.toml", "characters")
def _(work):
    text = ARRAY.read_text().replace('name = "FELL"', f'name = "{"F" * 2000}"')
    (work / "array.toml").write_text(text)
    return ["simulate", "array.toml", ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "1h"]


@probe("simulate-array-nested", "array.toml", "nested")
def _(work):
    (work / "array.toml").write_text('name = "x"\nz = ' + "[" * 3000 + "]" * 3000 + "\n")
    return ["simulate", "array.toml", ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "1h"]


@probe("simulate-output-exists", "s.uvfits", "--force")
def _(work):
    shutil.copy(ARRAY, work / "array.toml")
    (work / "s.uvfits").write_bytes(SENTINEL)
    return ["simulate", "array.toml", ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "1h"]


# ---- devices, pipes and oversized files where a small file is expected ------------------------


def _fifo(work, name):
    os.mkfifo(work / name)
    return name


def _zero(work, name):
    os.symlink("/dev/zero", work / name)
    return name


@probe("model-is-pipe", "p.toml", "not a regular file")
def _(work):
    return ["fit", DATA, _fifo(work, "p.toml")]


@probe("model-is-dev-zero", "z.toml", "not a regular file")
def _(work):
    return ["fit", DATA, _zero(work, "z.toml")]


@probe("model-oversized", "big.toml", "bytes")
def _(work):
    toml_model(work, "big.toml", "# padding\n" * 2_000_000)
    return ["fit", DATA, "big.toml"]


@probe("data-ecsv-is-pipe", "p.ecsv", "not a regular file")
def _(work):
    return ["info", _fifo(work, "p.ecsv")]


@probe("data-uvfits-is-pipe", "p.uvfits", "not a regular file")
def _(work):
    return ["fit", _fifo(work, "p.uvfits"), ONE]


@probe("data-is-dev-zero", "z.uvfits", "not a regular file")
def _(work):
    return ["closures", _zero(work, "z.uvfits")]


@probe("fit-json-is-dev-zero", "z.json", "not a regular file")
def _(work):
    return ["plot", DATA, "--fit", _zero(work, "z.json"), "--kind", "uv", "-o", "p.png"]


@probe("posterior-json-is-pipe", "p.json", "not a regular file")
def _(work):
    fit_json(work)
    return ["report", DATA, "--fit", "fit.json", "--posterior", _fifo(work, "p.json"), "-o", "r.html"]


@probe("manifest-is-pipe", "p.toml", "not a regular file")
def _(work):
    return ["batch", _fifo(work, "p.toml")]


@probe("array-is-dev-zero", "z.toml", "not a regular file")
def _(work):
    return ["simulate", _zero(work, "z.toml"), ONE, "-o", "s.uvfits", *SIMULATE, "--duration", "1h"]


@probe("fit-model-from-json-pipe", "p.json", "not a regular file")
def _(work):
    return ["closures", DATA, "--model", _fifo(work, "p.json")]


# ---- odd but usable inputs: accepted, with a note and nothing raw -----------------------------


def _nan_rows(work, column):
    vs = demo_rows(n=60)
    getattr(vs, column)[[3, 17]] = np.nan
    ecsv(work, "n.ecsv", vs)
    fit_json(work)
    return "n.ecsv"


@probe("accepted-report-nan-times", "non-finite time", outputs=["r.html"])
def _(work):
    return ["report", _nan_rows(work, "time"), "--fit", "fit.json", "-o", "r.html"]


@probe("accepted-plot-uv-nan-uv", "non-finite u", outputs=["p.png"])
def _(work):
    return ["plot", _nan_rows(work, "u"), "--fit", "fit.json", "--kind", "uv", "-o", "p.png"]


@probe("accepted-info-nan-times", "non-finite time", outputs=[])
def _(work):
    return ["info", _nan_rows(work, "time")]


@probe("accepted-closures-underflow", "numerical warning", outputs=[])
def _(work):
    """A Gaussian of 20 mas on the demo data: its visibilities underflow to 0 on long baselines."""
    body = component("gaussian", flux=0.3, fwhm="{ value = 20.0, fixed = true }")
    toml_model(work, "wide.toml", body)
    return ["closures", DATA, "--model", "wide.toml"]


@probe("accepted-absurd-times", "time outside MJD", outputs=[])
def _(work):
    """Two rows at MJD 9.3e9 (a damaged date): flagged, not passed to the calendar conversions."""
    vs = demo_rows(n=60)
    vs.time[[4, 9]] = 9.3e9
    ecsv(work, "t.ecsv", vs)
    return ["info", "t.ecsv"]


@probe("ecsv-all-times-absurd", "t.ecsv", "no unflagged")
def _(work):
    ecsv(work, "t.ecsv", demo_rows(time=np.full(24, -5e6)))
    return ["fit", "t.ecsv", ONE]


@probe("accepted-long-names-at-limit", "stations", outputs=[])
def _(work):
    ecsv(work, "l.ecsv", demo_rows(long_name="N" * 63))
    return ["info", "l.ecsv"]


# ---- the runner -------------------------------------------------------------------------------


def _snapshot(root):
    """Every file under ``root`` with its bytes (links and pipes by what they are, unread)."""
    out = {}
    for folder, dirs, files in os.walk(root):
        for name in files + [d for d in dirs if os.path.islink(os.path.join(folder, d))]:
            path = os.path.join(folder, name)
            if not os.path.islink(path) and not os.path.isfile(path):
                out[path] = b"special file"
            elif os.path.islink(path):
                out[path] = b"link:" + os.readlink(path).encode()
            else:
                with open(path, "rb") as handle:
                    out[path] = handle.read()
    return out


def _peak_bytes():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _prepare_base(root):
    """One fit JSON of the demo data, shared by the probes that tamper with it."""
    from uvfit.cli import main

    base = root / "_base"
    base.mkdir()
    for name in ("uvd0917.uvfits", "one.toml", "two.toml"):
        shutil.copy(DEMO / name, base / name)
    old = os.getcwd()
    os.chdir(base)
    try:
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            try:
                main(["fit", "uvd0917.uvfits", "one.toml", "--no-resolved-test", "--json", "fit.json"])
            except SystemExit as exc:
                assert exc.code == 0, exc.code
    finally:
        os.chdir(old)


def run_probe(root, item):
    from uvfit.cli import main

    home = root / item.name
    work, outside = home / "work", home / "outside"
    work.mkdir(parents=True)
    outside.mkdir()
    (outside / "keep.json").write_bytes(SENTINEL)
    for name in ("uvd0917.uvfits", "one.toml", "two.toml"):
        shutil.copy(DEMO / name, work / name)
    args = [str(a) for a in item.build(work)]
    before = _snapshot(home)
    out, err = io.StringIO(), io.StringIO()
    old = os.getcwd()
    os.chdir(work)
    peak = _peak_bytes()
    start = time.monotonic()
    code = 0
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), warnings.catch_warnings():
            try:
                main(args)
            except SystemExit as exc:
                code = exc.code
            except BaseException as exc:  # noqa: BLE001 - recorded as a failure of the probe
                code = f"escaped {type(exc).__name__}: {exc}"
    finally:
        os.chdir(old)
    seconds = time.monotonic() - start
    after = _snapshot(home)
    changed = sorted(p for p in set(before) | set(after) if before.get(p) != after.get(p))
    return {
        "name": item.name,
        "args": args,
        "expect": list(item.expect),
        "code": code,
        "stdout": out.getvalue()[-4000:],
        "stderr": err.getvalue()[-4000:],
        "changed": [os.path.relpath(p, home) for p in changed],
        "seconds": seconds,
        "memory_growth": _peak_bytes() - peak,
    }


def main(argv=None):
    """python -m tests.helpers.hostile ROOT OUT.json [NAMES...]: run the probes (all, or those
    named) under ROOT and write their records to OUT.json."""
    argv = sys.argv[1:] if argv is None else argv
    root, report = Path(argv[0]), Path(argv[1])
    names = argv[2:] or list(PROBES)
    root.mkdir(parents=True, exist_ok=True)
    _prepare_base(root)
    records = [run_probe(root, PROBES[n]) for n in names]
    report.write_text(json.dumps(records, indent=1))


if __name__ == "__main__":
    main()

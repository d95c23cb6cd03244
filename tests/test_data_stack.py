"""Several files as one set: the two 3C 279 bands of 2017 April 5 (tests/data/3c279/ABOUT.md).

Checks against the real files (their rows read one by one, stacked by hand with numpy) and the
haversine distance of phase centres (common practice)."""

import dataclasses

import numpy as np
import pytest

import uvfit
from tests.helpers.real_data import REAL_DATA, two_gaussians
from uvfit.data.select import apply_selection
from uvfit.data.stack import file_of_rows, stack_sets
from uvfit.data.visset import VisibilitySet
from uvfit.errors import DataError

LO = REAL_DATA / "SR1_3C279_2017_095_lo_hops_netcal_StokesI.uvfits"
HI = REAL_DATA / "SR1_3C279_2017_095_hi_hops_netcal_StokesI.uvfits"


@pytest.fixture(scope="module")
def bands():
    # 10-minute coherent averages keep the fits below a second (484 rows of both bands)
    return [apply_selection(uvfit.read(p).good(), min_uv=1e7, average=600)[0] for p in (LO, HI)]


def by_hand(sets):
    """The rows of both files concatenated with numpy, the second file's channels moved past the first's."""
    shift = int(sets[0].channel.max()) + 1
    cols = {}
    for f in dataclasses.fields(VisibilitySet):
        a, b = getattr(sets[0], f.name), getattr(sets[1], f.name)
        if isinstance(a, np.ndarray):
            cols[f.name] = np.concatenate([a, b + shift if f.name == "channel" else b])
    return VisibilitySet(**cols, source=sets[0].source, ra_deg=sets[0].ra_deg, dec_deg=sets[0].dec_deg)


def test_stacked_bands_keep_every_row(bands):
    both = stack_sets(bands, ["lo", "hi"])
    assert both.n == bands[0].n + bands[1].n
    assert np.array_equal(both.vis, np.concatenate([bands[0].vis, bands[1].vis]))
    assert np.array_equal(both.frequency, np.concatenate([bands[0].frequency, bands[1].frequency]))
    assert set(both.channel[: bands[0].n]).isdisjoint(both.channel[bands[0].n :])
    assert np.array_equal(file_of_rows(both), np.repeat([0, 1], [bands[0].n, bands[1].n]))
    assert np.array_equal(file_of_rows(both.subset(both.frequency > both.frequency.mean())), np.ones(bands[1].n, int))


def test_joint_fit_equals_a_fit_of_the_table_stacked_by_hand(bands):
    model = two_gaussians(east=-20.0, north=-20.0)
    joint = uvfit.fit(stack_sets(bands), model, mode="complex", systematic=0.02, resolved_test=False).to_dict()
    hand = uvfit.fit(by_hand(bands), model, mode="complex", systematic=0.02, resolved_test=False).to_dict()
    for key in ("a-b.separation", "a-b.position_angle"):
        assert joint["derived"][key]["value"] == pytest.approx(hand["derived"][key]["value"], rel=1e-6)
    assert joint["observation"]["time_start_mjd"] == pytest.approx(min(b.time.min() for b in bands))


def test_fit_of_several_files_reports_each_files_chi2(tmp_path):
    # the two real files through the command line; the per-file chi2 add up to the total
    import json

    from uvfit.cli import main

    model = tmp_path / "m.toml"
    model.write_text(
        'angular_unit = "uas"\n[[component]]\nname = "a"\nshape = "gaussian"\nflux = 8.0\neast = 0.0\nnorth = 0.0\n'
        "fwhm = { value = 20.0, min = 0.0, max = 200.0 }\n"
    )
    out = tmp_path / "f.json"
    args = ["fit", str(LO), str(HI), str(model), "--min-uv", "1e7", "--average", "600", "--no-resolved-test"]
    with pytest.raises(SystemExit) as exc:
        main([*args, "--json", str(out)])
    assert exc.value.code == 0
    rec = json.loads(out.read_text())
    assert rec["data"] == [str(LO), str(HI)] and [f["data"] for f in rec["files"]] == rec["data"]
    assert sum(f["chi2"] for f in rec["files"]) == pytest.approx(rec["statistics"]["chi2"], rel=1e-9)


def test_different_sources_or_phase_centres_are_refused(bands):
    lo, hi = bands
    moved = dataclasses.replace(hi, dec_deg=hi.dec_deg + 0.01 / 3600)  # 10 mas away
    with pytest.raises(DataError, match="phase centre 0.01 arcsec"):
        stack_sets([lo, moved], ["lo", "hi"])
    other = dataclasses.replace(hi, source="3C 273")
    with pytest.raises(DataError, match="observes '3C 273'"):
        stack_sets([lo, other], ["lo", "hi"])

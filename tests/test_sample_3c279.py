"""The sampler on real data: 3C 279 at 230 GHz, 2017 April 5 (see tests/data/3c279/ABOUT.md)."""

import uvfit
from tests.helpers.real_data import REAL_DATA, two_gaussians
from uvfit.data.select import apply_selection
from uvfit.infer.sampling import sample

DATA = REAL_DATA


def test_closure_posterior_puts_the_jet_south_west():
    # Outside source: Kim et al. 2020, A&A 640, A69 and REFERENCES.md ("Real data to test on"): two
    # circular Gaussians fitted to closure phases and log closure amplitudes with a 2% systematic
    # floor put the fainter component south-west of the brighter one, position angle 180-270 deg,
    # 25-30 microarcseconds away. Baselines shorter than 10 Mlambda (co-located stations) are left
    # out, as a compact two-component model cannot hold arcsecond-scale emission (common practice).
    vs, _ = apply_selection(uvfit.read(DATA / "SR1_3C279_2017_095_lo_hops_netcal_StokesI.uvfits").good(), min_uv=1e7)
    model = two_gaussians(east=-20.0, north=-20.0)
    post = sample(vs.good(), model, mode="closure", systematic=0.02, n_walkers=12, max_steps=200, seed=1)
    pa = post.derived["a-b.position_angle"]
    sep = post.derived["a-b.separation"]
    assert 180.0 < pa["lower_95"] and pa["upper_95"] < 270.0, pa
    assert 25.0 < sep["lower_95"] and sep["upper_95"] < 30.0, sep  # measured here: 28.90 uas, PA 237.3
    assert post.parameters["b.flux"]["unit"] == "Jy" and sep["unit"] == "uas"

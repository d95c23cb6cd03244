"""The model as a FITS image: pixel integrals, world coordinates, restoring beam, provenance.

Sources beside each check: scipy (multivariate normal distribution, dblquad), astropy (io.fits,
wcs), the SIN projection formulas of Calabretta & Greisen (2002, A&A 395, 1077), a numerical
dirty beam (direct cosine sum).
"""

import json
import os

import numpy as np
import pytest
from astropy.io import fits
from astropy.wcs import WCS
from click.testing import CliRunner
from scipy import integrate, stats

from tests.helpers.sky_cases import case_params, scaled
from uvfit import tasks
from uvfit.cli import cli, main
from uvfit.show import modelimage
from uvfit.sky.shapes import shape_class
from uvfit.sky.shapes.gaussian import bivariate_normal_cdf, gaussian_pixel_integrals

DEMO = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "uvfit", "demo_data")
MAS = np.pi / 180.0 / 3.6e6
RA0, DEC0 = 201.25, 37.5  # invented phase centre

MODEL = """angular_unit = "mas"
[[component]]
name = "core"
shape = "point"
flux = 0.7
east = 0.31
north = -0.22
[[component]]
name = "knot"
shape = "elliptical_gaussian"
flux = 0.4
east = -1.1
north = 0.8
fwhm = 0.6
axis_ratio = 0.4
position_angle = 35.0
[[component]]
name = "halo"
shape = "gaussian"
flux = 0.2
east = 0.4
north = 0.3
fwhm = 1.5
[[component]]
name = "blob"
shape = "disk"
flux = 0.1
east = 1.5
north = -1.2
diameter = 0.9
"""


def fit_record(model_toml=MODEL, **extra):
    """A fit record as ``uvfit fit --json`` writes it, reduced to what the image reads."""
    rec = {
        "version": "test",
        "mode": "complex",
        "seed": 3,
        "data": "invented.uvfits",
        "angular_unit": "mas",
        "frequency_hz": 15e9,
        "parameters": {},
        "statistics": {},
        "model_toml": model_toml,
        "observation": {"source": "INVENTED", "ra_deg": RA0, "dec_deg": DEC0, "time_start_mjd": 60000.25},
    }
    rec.update(extra)
    return rec


def test_bivariate_normal_cdf_matches_scipy():
    # scipy.stats.multivariate_normal.cdf (reference library)
    rng = np.random.default_rng(1)
    for _ in range(20):
        h, k = rng.normal(0, 1.5, 2)
        rho = rng.uniform(-0.95, 0.95)
        ref = stats.multivariate_normal(mean=[0, 0], cov=[[1, rho], [rho, 1]]).cdf([h, k])
        assert bivariate_normal_cdf(h, k, rho) == pytest.approx(ref, abs=1e-7)
    # h = k = 0: 1/4 + arcsin(rho) / (2 pi) (Sheppard's formula, common practice)
    assert bivariate_normal_cdf(0.0, 0.0, 0.5) == pytest.approx(0.25 + np.arcsin(0.5) / (2 * np.pi), abs=1e-15)


def test_tilted_gaussian_pixels_are_exact_integrals():
    # scipy.integrate.dblquad of the Gaussian's density over single pixels (reference library)
    fwhm_a, fwhm_b, phi = 0.6 * MAS, 0.25 * MAS, np.radians(35.0)
    step = 0.1 * MAS
    ll, mm = modelimage.pixel_centres(16, step)
    frac = gaussian_pixel_integrals(ll - 0.03 * MAS, mm + 0.01 * MAS, fwhm_a, fwhm_b, phi)
    c = 4 * np.log(2)

    def density(y, x):
        xa = x * np.sin(phi) + y * np.cos(phi)
        xb = x * np.cos(phi) - y * np.sin(phi)
        return c / (np.pi * fwhm_a * fwhm_b) * np.exp(-c * (xa**2 / fwhm_a**2 + xb**2 / fwhm_b**2))

    for j, i in [(8, 8), (9, 6), (5, 10), (12, 3)]:
        x0, y0 = ll[j, i] - 0.03 * MAS, mm[j, i] + 0.01 * MAS
        ref, _ = integrate.dblquad(density, x0 - step / 2, x0 + step / 2, y0 - step / 2, y0 + step / 2)
        assert frac[j, i] == pytest.approx(ref, rel=1e-7, abs=1e-12)


def test_unrestored_pixel_sum_is_the_model_flux():
    # the model's flux: the sum of the component fluxes in the model file (1.4 Jy)
    rep = tasks.image(fit_record(), pixel=0.05, size=128)
    assert rep.record["bunit"] == "JY/PIXEL"
    assert rep.record["model_flux_jy"] == pytest.approx(1.4, rel=1e-12)
    assert float(np.sum(rep.pixels, dtype=float)) == pytest.approx(1.4, rel=1e-3)
    rules = rep.record["rendering"]
    assert rules["core"].startswith("exact") and rules["knot"].startswith("exact")
    assert rules["blob"].startswith("super-sampled")


def test_written_file_opens_and_its_wcs_round_trips(tmp_path):
    # astropy.io.fits and astropy.wcs (reference library)
    rep = tasks.image(fit_record(), pixel=0.05, size=64)
    path = str(tmp_path / "m.fits")
    rep.write(path)
    with fits.open(path) as hdul:
        header, data = hdul[0].header, hdul[0].data.astype(float)
    assert data.shape == (64, 64) and header["BUNIT"] == "JY/PIXEL"
    assert header["CTYPE1"] == "RA---SIN" and header["CTYPE2"] == "DEC--SIN" and header["CDELT1"] < 0
    history = " ".join(str(h) for h in header["HISTORY"])
    assert "fit mode: complex" in history and "seed: 3" in history and "invented.uvfits" in history
    w = WCS(header)
    again = WCS(w.to_header())
    assert np.allclose(again.wcs.crval, [RA0, DEC0]) and np.allclose(again.wcs.cdelt, w.wcs.cdelt)
    world = w.pixel_to_world([3.2, 40.0], [10.5, 51.7])
    px, py = w.world_to_pixel(world)
    assert np.allclose(px, [3.2, 40.0], atol=1e-8) and np.allclose(py, [10.5, 51.7], atol=1e-8)
    with pytest.raises(Exception, match="exists"):
        rep.write(path)


def sin_world(l_rad, m_rad, ra0, dec0):
    """(RA, Dec) in degrees of direction cosines (l, m) about (ra0, dec0): the inverse SIN
    projection (Calabretta & Greisen 2002, A&A 395, 1077, section 5.1.5)."""
    d0 = np.radians(dec0)
    n = np.sqrt(1 - l_rad**2 - m_rad**2)
    dec = np.arcsin(m_rad * np.cos(d0) + n * np.sin(d0))
    ra = np.radians(ra0) + np.arctan2(l_rad, n * np.cos(d0) - m_rad * np.sin(d0))
    return np.degrees(ra), np.degrees(dec)


def test_off_centre_point_lands_on_the_pixel_astropy_gives(tmp_path):
    # astropy.wcs.WCS.world_to_pixel of the point's sky position (SIN formulas above)
    east, north = 0.837, -0.412
    toml = f'angular_unit = "mas"\n[[component]]\nname = "p"\nshape = "point"\nflux = 1.0\neast = {east}\nnorth = {north}\n'
    rep = tasks.image(fit_record(toml), pixel=0.1, size=32)
    path = str(tmp_path / "p.fits")
    rep.write(path)
    with fits.open(path) as hdul:
        header, data = hdul[0].header, hdul[0].data
    ra, dec = sin_world(east * MAS, north * MAS, RA0, DEC0)
    x, y = WCS(header).all_world2pix([[ra, dec]], 0)[0]
    j, i = np.unravel_index(np.argmax(data), data.shape)
    assert (i, j) == (int(np.rint(x)), int(np.rint(y)))
    assert i < 16  # east is to the left (smaller column)


def test_restored_point_has_the_beam(tmp_path):
    # second moments of the written image in world offsets from astropy.wcs (reference library)
    toml = 'angular_unit = "mas"\n[[component]]\nname = "p"\nshape = "point"\nflux = 2.0\neast = 0.0\nnorth = 0.0\n'
    major, minor, pa = 1.2, 0.5, 30.0
    rep = tasks.image(fit_record(toml), pixel=0.05, size=128, restore=f"{major},{minor},{pa}")
    path = str(tmp_path / "r.fits")
    rep.write(path)
    with fits.open(path) as hdul:
        header, data = hdul[0].header, hdul[0].data.astype(float)
    assert header["BUNIT"] == "JY/BEAM"
    assert header["BMAJ"] * 3.6e6 == pytest.approx(major) and header["BPA"] == pytest.approx(pa)
    assert data.max() == pytest.approx(2.0, rel=1e-6)  # a point of S Jy peaks at S Jy/beam
    yy, xx = np.indices(data.shape)
    world = WCS(header).pixel_to_world(xx.ravel(), yy.ravel())
    centre = WCS(header).pixel_to_world(64, 64)
    dra, ddec = centre.spherical_offsets_to(world)
    e, n = dra.to_value("mas"), ddec.to_value("mas")
    w = np.clip(data.ravel(), 0, None)  # FFT round-off leaves values of order -1e-17
    w = w / w.sum()
    cov = np.cov(np.vstack([e, n]), aweights=w, bias=True)
    got = modelimage.beam_from_covariance(cov, "measured")
    assert got.major == pytest.approx(major, rel=0.01)
    assert got.minor == pytest.approx(minor, rel=0.01)
    assert got.pa_deg == pytest.approx(pa, rel=0.01)


def test_auto_beam_has_the_dirty_beam_curvature():
    # numerical dirty beam (direct cosine sum) differentiated at its peak by finite differences
    rng = np.random.default_rng(4)
    u = rng.normal(0, 2e8, 300) * np.array([1.0])
    v = 0.5 * u + rng.normal(0, 1e8, 300)
    sigma = rng.uniform(0.5, 2.0, 300)
    beam = modelimage.uv_coverage_beam(u, v, sigma, MAS)
    w = 1 / sigma**2

    def dirty(l, m):
        return np.sum(w * np.cos(2 * np.pi * (u * l + v * m) * MAS)) / np.sum(w)

    h = 0.002
    hess = np.array(
        [
            [dirty(h, 0) + dirty(-h, 0) - 2, (dirty(h, h) - dirty(h, -h) - dirty(-h, h) + dirty(-h, -h)) / 4],
            [0.0, dirty(0, h) + dirty(0, -h) - 2],
        ]
    )
    hess[1, 0] = hess[0, 1]
    hess = hess / h**2
    # Gaussian exp(-x C^-1 x / 2) has Hessian -C^-1 at its peak
    assert np.allclose(-np.linalg.inv(beam.covariance()), hess, rtol=1e-3)


def test_closure_fit_image_uses_the_flux_scale_and_says_so():
    # the flux-scale estimate recorded in the fit (flux_scale.scale) times the model flux
    rec = fit_record(
        mode="closure_phase",
        flux_scale={
            "measured_by_mode": False,
            "scale": 0.5,
            "total_flux_jy": 0.7,
            "total_flux_error_jy": 0.1,
            "n_rows": 9,
        },
    )
    rep = tasks.image(rec, pixel=0.05, size=128)
    assert rep.record["model_flux_jy"] == pytest.approx(0.7, rel=1e-12)
    assert rep.record["flux_measured"] is False
    assert any("does not measure the flux" in n for n in rep.record["notices"])
    assert any("NOT MEASURED" in h for h in rep.history)


def test_cli_demo_fit_to_image(tmp_path, capsys):
    # the demo's real run: the fit records the phase centre of its UVFITS file (read by astropy)
    runner = CliRunner()
    fit_json, out, summary = str(tmp_path / "f.json"), str(tmp_path / "m.fits"), str(tmp_path / "m.json")
    data = os.path.join(DEMO, "uvd0917.uvfits")
    r = runner.invoke(cli, ["fit", data, os.path.join(DEMO, "two.toml"), "--json", fit_json])
    assert r.exit_code == 0, r.output
    with open(fit_json) as handle:
        fit = json.load(handle)
    with fits.open(data) as hdul:
        ra_file = [hdul[0].header[k] for k in hdul[0].header if str(k).startswith("CTYPE")]
    assert "RA" in ra_file and fit["observation"]["time_mean_mjd"] > 50000
    r = runner.invoke(cli, ["image", fit_json, "-o", out, "--restore", "auto", "--json", summary])
    assert r.exit_code == 0, r.output
    with open(summary) as handle:
        rec = json.load(handle)
    with fits.open(out) as hdul:
        header = hdul[0].header
    assert header["CRVAL1"] == pytest.approx(fit["observation"]["ra_deg"] % 360)
    assert header["BMAJ"] * 3.6e6 == pytest.approx(rec["beam"]["major"])
    assert rec["flux_in_image_jy"] == pytest.approx(rec["model_flux_jy"], rel=1e-3)
    for args, words in [
        (["image", fit_json, "-o", out], "exists"),
        (["image", fit_json, "-o", str(tmp_path / "b.fits"), "--restore", "big"], "--restore"),
        (["image", fit_json, "-o", str(tmp_path / "b.fits"), "--size", "3"], "--size"),
    ]:
        with pytest.raises(SystemExit) as exc:
            main(args)
        err = capsys.readouterr().err.strip()
        assert exc.value.code == 2 and len(err.splitlines()) == 1 and words in err, err
    assert not os.path.exists(tmp_path / "b.fits")


@pytest.mark.parametrize("key,settings,p", case_params())
def test_every_shape_pixel_flux_keeps_flux_and_low_frequencies(key, settings, p):
    # numpy.fft of the pixel-integrated image against the shape's own visibility at the lowest
    # frequencies (a pixel integral multiplies V by sinc(pi u dx) sinc(pi v dx) > 0.996 there)
    shape = shape_class(key)(**settings)
    n, dx = 128, 0.02 * MAS
    pr = scaled(shape, p, 20 * dx)
    axis = (np.arange(n) - n // 2) * dx
    ll, mm = np.meshgrid(axis, axis)  # [m index, l index], both rising
    got = shape.pixel_flux(ll, mm, pr)
    assert got.fraction.shape == (n, n) and isinstance(got.rule, str) and got.rule
    assert got.fraction.sum() == pytest.approx(1.0, abs=1e-3)
    spectrum = np.fft.fft2(np.fft.ifftshift(got.fraction))
    k = np.arange(-3, 4)
    b, a = np.meshgrid(k, k, indexing="ij")
    expected = shape.structure(a / (n * dx), b / (n * dx), pr)
    assert np.max(np.abs(spectrum[b % n, a % n] - expected)) < 0.02

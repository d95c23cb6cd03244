"""The fitted model as a FITS image on a celestial grid, optionally restored with a Gaussian beam.

File format: FITS (Pence et al. 2010, A&A 524, A42); world coordinates: Greisen & Calabretta
(2002, A&A 395, 1061) with the orthographic (SIN) projection of Calabretta & Greisen (2002, A&A
395, 1077) about the phase centre, so the pixel
offsets are the direction cosines l (east), m (north) of the visibility phase
exp(-2 pi i (u l + v m)). Axis 1 is right ascension with CDELT1 < 0 (east to the left), axis 2
declination; the reference pixel (CRPIX, 1-based) is pixel N // 2 + 1 on both axes.

Unrestored the pixels hold the model's flux inside each pixel (JY/PIXEL), computed per
component as its shape says (``Shape.pixel_flux``). Restored, the pixel flux is convolved with an
elliptical Gaussian beam of peak 1 (JY/BEAM: a point of flux S peaks at S). The automatic beam
is the Gaussian with the curvature of the dirty beam at its peak under natural weights
w = 1 / sigma^2: the dirty beam sum w cos 2 pi (u l + v m) / sum w is 1 - 2 pi^2 x^T M x near its
peak, M the weighted second moments of (u, v), so the beam's covariance is M^-1 / (4 pi^2)
(common practice; the main lobe of a sparse array is not Gaussian further out).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

#: FWHM = sqrt(8 ln 2) standard deviations
FWHM_PER_SIGMA = float(np.sqrt(8.0 * np.log(2.0)))
#: how the automatic beam is found (recorded in the outputs)
AUTO_BEAM_METHOD = (
    "Gaussian with the dirty beam's curvature at its peak (natural weights 1/sigma^2): "
    "covariance = (weighted second moments of u, v)^-1 / (4 pi^2)"
)
#: the restoring beam is drawn out to this many standard deviations of its major axis
BEAM_REACH = 6.0


class Beam(NamedTuple):
    """An elliptical Gaussian beam: FWHM ``major`` >= ``minor`` (the model's angular unit),
    ``pa_deg`` of the major axis (north through east, in [0, 180)), ``how`` it was chosen."""

    major: float
    minor: float
    pa_deg: float
    how: str

    def covariance(self) -> np.ndarray:
        """2 x 2 covariance of the beam in (east, north), model unit squared."""
        phi = np.radians(self.pa_deg)
        e_maj = np.array([np.sin(phi), np.cos(phi)])
        e_min = np.array([np.cos(phi), -np.sin(phi)])
        s_maj, s_min = self.major / FWHM_PER_SIGMA, self.minor / FWHM_PER_SIGMA
        return s_maj**2 * np.outer(e_maj, e_maj) + s_min**2 * np.outer(e_min, e_min)

    def area(self) -> float:
        """The beam's integral for a peak of 1: pi major minor / (4 ln 2) (model unit squared)."""
        return float(np.pi * self.major * self.minor / (4.0 * np.log(2.0)))


def beam_from_covariance(cov: np.ndarray, how: str) -> Beam:
    """The Beam of a 2 x 2 covariance in (east, north)."""
    values, vectors = np.linalg.eigh(np.asarray(cov, dtype=float))
    lo, hi = float(max(values[0], 0.0)), float(values[1])
    east, north = vectors[:, 1]
    pa = float(np.degrees(np.arctan2(east, north))) % 180.0
    return Beam(FWHM_PER_SIGMA * np.sqrt(hi), FWHM_PER_SIGMA * np.sqrt(lo), pa, how)


def uv_coverage_beam(u: np.ndarray, v: np.ndarray, sigma: np.ndarray, rad_per_unit: float) -> Beam:
    """The automatic beam (AUTO_BEAM_METHOD) of rows at (u, v) (wavelengths) with errors sigma."""
    w = 1.0 / np.asarray(sigma, dtype=float) ** 2
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    moments = np.array([[np.sum(w * u * u), np.sum(w * u * v)], [np.sum(w * u * v), np.sum(w * v * v)]]) / np.sum(w)
    cov = np.linalg.inv(moments) / (4.0 * np.pi**2) / rad_per_unit**2
    return beam_from_covariance(cov, AUTO_BEAM_METHOD)


def pixel_centres(npix: int, pixel: float) -> tuple[np.ndarray, np.ndarray]:
    """(l, m): 2-D offsets (east, north) of the pixel centres, in the unit of ``pixel``.

    Array index [j, i] is FITS pixel (i + 1, j + 1): l falls with i (CDELT1 < 0), m rises with j,
    and pixel (N // 2, N // 2) (0-based) is the phase centre."""
    index = np.arange(int(npix)) - int(npix) // 2
    return np.meshgrid(-index * float(pixel), index * float(pixel))


def convolve_beam(image: np.ndarray, pixel: float, beam: Beam) -> np.ndarray:
    """``image`` (flux per pixel) convolved with ``beam`` of peak 1: Jy per beam."""
    from scipy.signal import fftconvolve

    cov = beam.covariance()
    reach = int(np.ceil(BEAM_REACH * beam.major / FWHM_PER_SIGMA / pixel))
    reach = min(reach, max(image.shape))
    ll, mm = pixel_centres(2 * reach + 1, pixel)
    inv = np.linalg.inv(cov)
    quad = inv[0, 0] * ll * ll + 2.0 * inv[0, 1] * ll * mm + inv[1, 1] * mm * mm
    kernel = np.exp(-0.5 * quad)
    return fftconvolve(image, kernel, mode="same")


def default_pixel(model, npix: int, max_uv: float | None) -> float:
    """A pixel (model unit): a tenth of the nominal resolution 1 / max(uv distance) when that is
    known, larger where needed to hold every member (offset plus size) in ``npix`` pixels with a
    30% margin."""
    reach = 0.0
    for mb in model.members():
        size = mb["member"].main_size(mb["parameters"]) or 0.0
        reach = max(reach, abs(float(mb["east"])) + abs(size), abs(float(mb["north"])) + abs(size))
    pixel = 2.6 * reach / npix
    if max_uv and max_uv > 0:
        pixel = max(pixel, 1.0 / max_uv / model.rad_per_unit / 10.0)
    if not pixel > 0 or not np.isfinite(pixel):
        pixel = 1.0 / npix
    return float(pixel)


def header_cards(
    npix: int, pixel_deg: float, ra_deg: float, dec_deg: float, bunit: str, beam_deg: Beam | None
) -> list[tuple[str, object, str]]:
    """(keyword, value, comment) of the image's world coordinates and units."""
    centre = float(npix // 2 + 1)
    cards: list[tuple[str, object, str]] = [
        ("BUNIT", bunit, "brightness unit"),
        ("CTYPE1", "RA---SIN", "right ascension, orthographic projection"),
        ("CRVAL1", float(ra_deg) % 360.0, "[deg] phase centre"),
        ("CRPIX1", centre, "reference pixel (1-based)"),
        ("CDELT1", -float(pixel_deg), "[deg] pixel step, east to the left"),
        ("CUNIT1", "deg", ""),
        ("CTYPE2", "DEC--SIN", "declination, orthographic projection"),
        ("CRVAL2", float(dec_deg), "[deg] phase centre"),
        ("CRPIX2", centre, "reference pixel (1-based)"),
        ("CDELT2", float(pixel_deg), "[deg] pixel step"),
        ("CUNIT2", "deg", ""),
        ("RADESYS", "ICRS", "celestial frame of the data's coordinates"),
        ("EQUINOX", 2000.0, ""),
    ]
    if beam_deg is not None:
        cards += [
            ("BMAJ", float(beam_deg.major), "[deg] restoring beam FWHM, major axis"),
            ("BMIN", float(beam_deg.minor), "[deg] restoring beam FWHM, minor axis"),
            ("BPA", float(beam_deg.pa_deg), "[deg] beam major axis, north through east"),
        ]
    return cards


def parse_beam(text: str) -> Beam:
    """A Beam from "MAJOR,MINOR,PA" (model unit, model unit, degrees)."""
    from ..errors import UvfitError

    parts = [p.strip() for p in str(text).split(",")]
    try:
        major, minor, pa = (float(p) for p in parts)
    except ValueError:
        raise UvfitError(
            f"restore must be 'auto' or three numbers MAJOR,MINOR,PA (got {text!r})",
            "give e.g. 0.5,0.3,-20: FWHM of the major and minor axes in the model's angular unit, "
            "position angle in degrees",
        ) from None
    if not (np.isfinite(major) and np.isfinite(minor) and np.isfinite(pa)) or not major >= minor > 0:
        raise UvfitError(
            f"restore beam {text!r}: the FWHMs must be finite with MAJOR >= MINOR > 0",
            "give e.g. 0.5,0.3,-20",
        )
    return Beam(major, minor, pa % 180.0, "given")


def build_image(
    fit: dict,
    fit_path: str | None = None,
    pixel: float | None = None,
    size: int = 256,
    restore: str | Beam | None = None,
    data=None,
) -> tuple[dict, np.ndarray, list, list]:
    """(record, pixels, cards, history) of the image of a fit result ``fit`` (its JSON).

    ``pixel`` in the fit's angular unit (default :func:`default_pixel`), ``size`` pixels a side,
    ``restore`` None, "auto" or a Beam (or its text). ``data`` (path or VisibilitySet) is read
    only when the fit records no phase centre or the beam is "auto"; default the fit's data file.
    """
    from .. import __version__
    from ..errors import UvfitError
    from ..infer.fluxscale import scaled_model
    from ..labels import IMAGE_CAUTIONS
    from .readback import merged_selection, model_from_fit

    if isinstance(size, bool) or not isinstance(size, (int, np.integer)) or not 8 <= int(size) <= 8192:
        raise UvfitError(f"size must be a whole number of pixels from 8 to 8192 (got {size!r})")
    size = int(size)
    if pixel is not None and not (np.isfinite(pixel) and pixel > 0):
        raise UvfitError(f"pixel must be a positive size in the fit's angular unit (got {pixel!r})")
    if isinstance(restore, str) and restore != "auto":
        restore = parse_beam(restore)
    observed = dict(fit.get("observation") or {})
    notices: list[str] = []
    vset = None
    need_data = restore == "auto" or not np.isfinite(float(observed.get("ra_deg") or np.nan))
    if need_data:
        source = data if data is not None else fit.get("data")
        if source is None:
            why = "the beam is 'auto'" if restore == "auto" else "the fit records no phase centre"
            raise UvfitError(f"{why} and no visibility file is known", "name the file the fit was made on with data")
        from ..data.select import read_selected

        chosen = merged_selection(fit, {})
        if isinstance(source, (list, tuple)):  # a joint fit of several files
            from ..data.stack import stack_sets

            vset = stack_sets([read_selected(s, chosen, good=True)[0] for s in source], [str(s) for s in source])
        else:
            vset, _ = read_selected(source, chosen, good=True)
        if not np.isfinite(float(observed.get("ra_deg") or np.nan)):
            observed.update({"source": vset.source, "ra_deg": vset.ra_deg, "dec_deg": vset.dec_deg})
    ra, dec = float(observed.get("ra_deg") or np.nan), float(observed.get("dec_deg") or np.nan)
    if not (np.isfinite(ra) and np.isfinite(dec)):
        raise UvfitError(
            "neither the fit nor its visibility file give the phase centre (right ascension, declination)",
            "fit a file that records the source position (UVFITS, Measurement Set)",
        )
    model = model_from_fit(fit, path=fit_path)
    flux_measured = (fit.get("flux_scale") or {}).get("measured_by_mode", True)
    scale = None
    if not flux_measured:
        scale = float((fit.get("flux_scale") or {}).get("scale", np.nan))
        if not np.isfinite(scale):
            raise UvfitError(
                f"the {fit.get('mode')} fit does not measure the flux and records no flux-scale estimate",
                "refit with the current version, or in a mode that measures the flux (complex, amplitude)",
            )
        model = scaled_model(model, fit)
        notices.append(
            f"the {fit.get('mode')} mode does not measure the flux: the fluxes are scaled by the amplitude "
            f"estimate {scale:.4g} (flux_scale of the fit), not measured"
        )
    frequency = fit.get("frequency_hz")
    max_uv = observed.get("max_uv_wavelengths") or (float(np.max(vset.uv_distance)) if vset is not None else None)
    if pixel is None:
        pixel = default_pixel(model, size, max_uv)
    ll, mm = pixel_centres(size, pixel)
    pixels, rules = model.pixel_flux(ll, mm, frequency=frequency)
    total = float(model.total_flux(frequency=frequency))
    inside = float(pixels.sum())
    beam = None
    bunit = "JY/PIXEL"
    if restore is not None:
        if restore == "auto":
            assert vset is not None
            beam = uv_coverage_beam(vset.u, vset.v, vset.sigma, model.rad_per_unit)
        else:
            beam = restore if isinstance(restore, Beam) else parse_beam(str(restore))
        pixels = convolve_beam(pixels, pixel, beam)
        bunit = "JY/BEAM"
    if total != 0 and abs(inside - total) > 1e-3 * abs(total):
        notices.append(
            f"the image holds {inside:.6g} Jy of the model's {total:.6g} Jy: flux lies outside the field "
            "(increase size or pixel)"
        )
    unit = fit.get("angular_unit") or model.angular_unit_text
    deg_per_unit = model.rad_per_unit * 180.0 / np.pi
    beam_deg = (
        None if beam is None else Beam(beam.major * deg_per_unit, beam.minor * deg_per_unit, beam.pa_deg, beam.how)
    )
    cards = header_cards(size, pixel * deg_per_unit, ra, dec, bunit, beam_deg)
    if observed.get("source"):
        cards.insert(0, ("OBJECT", str(observed["source"])[:68], "source"))
    if observed.get("time_start_mjd") is not None:
        from astropy.time import Time

        cards.append(("DATE-OBS", Time(observed["time_start_mjd"], format="mjd", scale="utc").isot, "first row, UTC"))
        cards.append(("MJD-OBS", float(observed["time_start_mjd"]), "first row, MJD (UTC)"))
    record = {
        "version": __version__,
        "fit": None if fit_path is None else str(fit_path),
        "fit_version": fit.get("version"),
        "mode": fit.get("mode"),
        "data": fit.get("data"),
        "seed": fit.get("seed"),
        "source": observed.get("source"),
        "ra_deg": ra,
        "dec_deg": dec,
        "size_pixels": size,
        "pixel": float(pixel),
        "angular_unit": unit,
        "frequency_hz": frequency,
        "bunit": bunit,
        "beam": None
        if beam is None
        else {"major": beam.major, "minor": beam.minor, "pa_deg": beam.pa_deg, "how": beam.how},
        "beam_area_pixels": None if beam is None else beam.area() / pixel**2,
        "model_flux_jy": total,
        "flux_in_image_jy": inside,
        "peak": float(pixels.max()),
        "peak_unit": bunit.replace("JY", "Jy").replace("PIXEL", "pixel").replace("BEAM", "beam"),
        "flux_measured": bool(flux_measured),
        "flux_scale": scale,
        "rendering": rules,
        "notices": notices,
        "cautions": list(IMAGE_CAUTIONS),
    }
    history = [
        f"uvfit {__version__} image of a fit made by uvfit {fit.get('version')}",
        f"fit file: {record['fit']}",
        f"fit mode: {record['mode']}; data: {record['data']}; seed: {record['seed']}",
        f"model at {frequency} Hz; pixel {pixel:.6g} {unit}; {size} x {size} pixels",
    ]
    history += [f"component {name}: {rule}" for name, rule in rules.items()]
    if beam is not None:
        history.append(
            f"restored (JY/BEAM, peak 1 beam): {beam.major:.6g} x {beam.minor:.6g} {unit}, PA {beam.pa_deg:.4g} deg"
        )
        history.append(f"beam: {beam.how}")
    else:
        history.append("unrestored: flux integrated over each pixel (JY/PIXEL)")
    if not flux_measured:
        history.append(f"fluxes NOT MEASURED by the {fit.get('mode')} mode: scaled by the estimate {scale:.6g}")
    history += list(IMAGE_CAUTIONS)
    return record, pixels, cards, history


def image_hdu(pixels: np.ndarray, cards: list, history: list):
    """The astropy PrimaryHDU (float32 pixels) with the cards and HISTORY lines."""
    from astropy.io import fits

    hdu = fits.PrimaryHDU(np.asarray(pixels, dtype=np.float32))
    for key, value, comment in cards:
        hdu.header[key] = (value, comment)
    import textwrap

    for line in history:
        for part in textwrap.wrap(line, 70, subsequent_indent="  "):
            hdu.header.add_history(part)
    return hdu

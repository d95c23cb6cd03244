"""Make the demo's data set: the invented array observes the invented source UVD 0917+224.

    python3 examples/demo/make_demo_data.py [--out PATH] [--force]

Writes ``uvfit/demo_data/uvd0917.uvfits`` (the file that ships with the package and that
``uvfit demo`` reads) from ``examples/demo/array.toml`` (nine invented 22 GHz stations) and
``examples/demo/truth.toml`` (the true structure: a 20 mJy double, 0.55 mas separation, flux
ratio 0.3). Everything is fixed here, the seed included, so running this again gives the same
visibilities (tests/test_demo.py checks it value for value against the shipped file).

The observation: one 10 h track on 2023-10-12 from 02:00 UTC, one 64 MHz channel at 22.2 GHz,
600 s integrations (already the length a user would average to: 2160 visibilities, about
100 kB). Thermal noise only, from the radiometer equation with the array file's SEFDs: the data
are perfectly calibrated, which real data never are.
"""

import argparse
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
if ROOT not in sys.path:  # run from a clone without installing: use the work tree's package
    sys.path.insert(0, ROOT)

ARRAY = os.path.join(HERE, "array.toml")
TRUTH = os.path.join(HERE, "truth.toml")
OUT = os.path.join(ROOT, "uvfit", "demo_data", "uvd0917.uvfits")

SEED = 917
SOURCE = "UVD 0917+224"
RA_DEG = 139.3  # 09h17m12s
DEC_DEG = 22.4  # +22d24m
START_UTC = "2023-10-12T02:00:00"
DURATION_S = 10 * 3600.0
INTEGRATION_S = 600.0
FREQUENCY_HZ = 22.2e9
BANDWIDTH_HZ = 64e6


def make(seed=SEED):
    """The demo's VisibilitySet (and the simulation layout), made exactly as shipped."""
    from astropy.time import Time

    from uvfit import load_model
    from uvfit.sim.array import load_array
    from uvfit.sim.observe import Observation, simulate

    obs = Observation(
        ra_deg=RA_DEG,
        dec_deg=DEC_DEG,
        start=Time(START_UTC, scale="utc"),
        duration_s=DURATION_S,
        integration_s=INTEGRATION_S,
        frequency_hz=FREQUENCY_HZ,
        bandwidth_hz=BANDWIDTH_HZ,
        channels=1,
        scan_length_s=INTEGRATION_S,
        source=SOURCE,
    )
    return simulate(load_array(ARRAY), load_model(TRUTH), obs, seed=seed)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=OUT, help="where to write the UVFITS file")
    parser.add_argument("--force", action="store_true", help="overwrite an existing file")
    args = parser.parse_args(argv)
    from uvfit.errors import UvfitError
    from uvfit.sim.observe import write_simulation

    vset, layout = make()
    try:
        write_simulation(vset, args.out, force=args.force)
    except UvfitError as exc:
        print(f"make_demo_data: {exc}", file=sys.stderr)
        return 2
    s = layout.summary()
    print(
        f"wrote {args.out}: {vset.n} visibilities, {s['baselines_with_data']} baselines, "
        f"nominal resolution {s['nominal_resolution_uas'] / 1e3:.3g} mas, "
        f"median sigma {1e3 * s['median_sigma_jy']:.3g} mJy, seed {SEED}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())

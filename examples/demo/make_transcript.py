"""Write the README's demo transcript from a real run of `uvfit demo --out uvfit-demo`.

    python3 examples/demo/make_transcript.py           # run the demo, replace the README block
    python3 examples/demo/make_transcript.py --check   # run it, exit 1 if the README differs

The demo runs in a temporary folder (so the printed paths read `uvfit-demo/...`); only its
standard output is kept (progress bars go to stderr). The README block is the fenced block that
starts with the line `$ uvfit demo --out uvfit-demo`. The run uses the numpy engine, which is what
`pip install .` gives; with the compiled engine (extra `fast`) the chain's numbers differ in the
third or fourth digit (a chain amplifies rounding differences). tests/test_practitioner_results.py
runs the same command on the same engine and compares.
"""

import argparse
import os
import re
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
README = os.path.join(ROOT, "README.md")
COMMAND = "uvfit demo --out uvfit-demo"
BLOCK = re.compile(r"(```\n\$ " + re.escape(COMMAND) + r"\n)(.*?)(```)", re.S)


def transcript(stdout, out_dir=None):
    """The README's text of a demo run's standard output (``out_dir`` printed as `uvfit-demo`)."""
    if out_dir:
        stdout = stdout.replace(out_dir.rstrip("/") + "/", "uvfit-demo/").replace(out_dir, "uvfit-demo")
    return "\n".join(line.rstrip() for line in stdout.strip("\n").splitlines()) + "\n"


def readme_transcript(text=None):
    """The transcript in the README (without the command line)."""
    text = open(README, encoding="utf-8").read() if text is None else text
    m = BLOCK.search(text)
    if not m:
        raise SystemExit(f"README.md has no block starting with '$ {COMMAND}'")
    return m.group(2)


def run_demo():
    """The transcript of a fresh run, in a temporary folder."""
    with tempfile.TemporaryDirectory(prefix="uvfit-transcript-") as tmp:
        # `pip install .` (the README's command) brings no compiled engine: the numpy path
        env = dict(os.environ, MPLBACKEND="Agg", PYTHONPATH=ROOT, UVFIT_ENGINE="numpy")
        proc = subprocess.run(
            [sys.executable, "-m", "uvfit"] + COMMAND.split()[1:],
            cwd=tmp,
            capture_output=True,
            text=True,
            env=env,
            check=True,
        )
    return transcript(proc.stdout)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only compare; exit 1 on a difference")
    args = parser.parse_args(argv)
    new = run_demo()
    text = open(README, encoding="utf-8").read()
    if args.check:
        same = readme_transcript(text) == new
        print("README transcript " + ("matches" if same else "differs from") + " the run")
        return 0 if same else 1
    text = BLOCK.sub(lambda m: m.group(1) + new + m.group(3), text, count=1)
    tmp = README + ".tmp"
    with open(tmp, "w", encoding="utf-8") as handle:
        handle.write(text)
    os.replace(tmp, README)
    print("README transcript written")
    return 0


if __name__ == "__main__":
    sys.exit(main())

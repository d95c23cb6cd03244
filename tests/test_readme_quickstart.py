"""The README's "Fit your own file" quick start works as written, on the real 3C 279 file it
names (tests/data/3c279, see its ABOUT.md): every command exits 0 and writes what it says."""

import json
import os
import re
import shlex
import shutil
import subprocess
import sys

from tests.helpers.demo_run import README, ROOT
from tests.helpers.real_data import real_file


def _section():
    text = open(README, encoding="utf-8").read()
    start = text.index("## Fit your own file")
    return text[start : text.index("\n## ", start + 3)]


def test_quick_start_commands_run_on_the_real_file(tmp_path):
    section = _section()
    toml = re.search(r"```toml\n(.*?)```", section, flags=re.S).group(1)
    block = re.search(r"```\n(uvfit info.*?)```", section, flags=re.S).group(1)
    commands = [line.split("#")[0].strip() for line in block.strip().splitlines()]
    assert [c.split()[1] for c in commands] == ["info", "fit", "closures", "report"]
    assert str(real_file("lo").relative_to(ROOT)) in " ".join(section.split())
    shutil.copy(real_file("lo"), tmp_path / "mydata.uvfits")
    (tmp_path / "two.toml").write_text(toml)
    env = dict(os.environ, MPLBACKEND="Agg", PYTHONPATH=ROOT)
    for command in commands:
        argv = [sys.executable, "-m", "uvfit"] + shlex.split(command)[1:]
        proc = subprocess.run(argv, cwd=tmp_path, capture_output=True, text=True, env=env, timeout=600)
        assert proc.returncode == 0, (command, proc.stderr[-2000:])
        assert "Traceback" not in proc.stderr
    fit = json.loads((tmp_path / "fit.json").read_text())
    # Outside source: Kim et al. 2020, A&A 640, A69 (REFERENCES.md, "Real data to test on"): the
    # fainter component lies south-west of the brighter one (position angle 180-270 deg).
    assert 180.0 < fit["derived"]["core-knot.position_angle"]["value"] < 270.0
    assert (tmp_path / "report.html").stat().st_size > 0

"""Package-level promises: a light import, the public names, the README's commands."""

import json
import re
import subprocess
import sys
from pathlib import Path

import atlas

ROOT = Path(__file__).resolve().parents[1]


def test_import_atlas_stays_light():
    # `import atlas` must not pull in matplotlib, dask or netCDF4 (the house style's rule).
    code = (
        "import sys, json, atlas; "
        "print(json.dumps(sorted(m for m in ('matplotlib', 'dask', 'distributed', 'netCDF4') "
        "if m in sys.modules)))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(out.stdout) == []


def test_public_names_resolve():
    for name in atlas.__all__:
        assert getattr(atlas, name) is not None
    assert atlas.METHODS[:2] == ("normal_cc", "edgeworth_cc")
    assert atlas.METRICS == ("interval", "cdf")


def test_readme_gives_the_two_setup_commands():
    # The README's first command installs and runs the demo; the second runs the tests that
    # .ci/run runs.
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```(?:bash|sh)?\n(.*?)```", text, flags=re.S)
    commands = "\n".join(blocks)
    assert "approx-atlas demo" in commands
    assert "python -m pytest -q" in commands
    assert "python -m pytest -q" in (ROOT / ".ci" / "run").read_text()


def test_version_is_in_the_changelog():
    text = (ROOT / "CHANGELOG.md").read_text()
    assert "Unreleased" in text or atlas.__version__ in text

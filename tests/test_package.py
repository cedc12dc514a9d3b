"""Package-level promises: a light import, the public names, the README's commands."""

import ast
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


def _atlas_imports(path):
    """The atlas modules a source file imports, anywhere in it (at the top or in a function)."""
    names = set()
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module)
            if node.module == "atlas":  # `from atlas import build` imports the module atlas.build
                names.update(
                    f"atlas.{alias.name}"
                    for alias in node.names
                    if (ROOT / "atlas" / f"{alias.name}.py").exists()
                )
        elif isinstance(node, ast.ImportFrom):
            raise AssertionError(f"{path.name}: relative import; the package imports absolutely")
    return {name for name in names if name == "atlas" or name.startswith("atlas.")}


def test_executors_do_not_import_the_build(tmp_path):
    # Dependencies point one way: build imports the chunk plan and the executors (this
    # process, the local pool, dask) and assembles the cube; they never import the build, nor
    # anything above it. A module of the package that does not exist yet counts as above.
    below = {"atlas", "atlas.approximations", "atlas.engine", "atlas.grid", "atlas.chunks"}
    for module in ("chunks", "pool", "distributed"):
        imported = _atlas_imports(ROOT / "atlas" / f"{module}.py") - {f"atlas.{module}"}
        assert imported <= below, f"atlas.{module} imports {sorted(imported - below)}"
    # The check itself sees each way of writing the import it is about.
    for code in ("from atlas import build", "import atlas.build as b",
                 "def f():\n    from atlas.build import build_atlas"):  # fmt: skip
        (tmp_path / "probe.py").write_text(f"from atlas import __version__\n{code}\n")
        assert _atlas_imports(tmp_path / "probe.py") == {"atlas", "atlas.build"}, code

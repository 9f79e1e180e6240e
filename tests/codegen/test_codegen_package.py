"""The templates are found after a non-editable install (wheel force-include)."""

import importlib.util
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

SCRIPT = """
import sys
import numpy as np
from gainloom.codegen.render import templates_dir
from gainloom.codegen.emit import render_files
from gainloom.design.table import GainTable, TableAxis
found = templates_dir()
table = GainTable("pi", (TableAxis("speed", "rpm", np.array([0.0, 1.0, 2.0])),),
                  {"kp": np.ones(3), "ki_ts": np.full(3, 0.01)}, 1e-4, (-1.0, 1.0))
files = render_files(table, "q15", "motor", None)
print(found)
print(len(files["motor.c"]))
"""


@pytest.mark.slow
@pytest.mark.skipif(
    importlib.util.find_spec("hatchling") is None, reason="hatchling (the build back-end) is not installed"
)
def test_installed_package_finds_its_templates(tmp_path):
    # Build from a copy of the project so no build artefacts land in the checkout.
    project = tmp_path / "project"
    project.mkdir()
    for name in ("pyproject.toml", "README.md", "DEVELOPERS.md"):
        if (ROOT / name).exists():
            shutil.copy(ROOT / name, project / name)
    if not (project / "README.md").exists():
        (project / "README.md").write_text("gainloom\n")  # pyproject names a readme
    shutil.copytree(ROOT / "src", project / "src", ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copytree(ROOT / "codegen_templates", project / "codegen_templates")
    target = tmp_path / "site"
    built = subprocess.run(
        [sys.executable, "-m", "pip", "install", "--quiet", "--no-deps", "--no-build-isolation", "--target",
         str(target), str(project)],
        capture_output=True, text=True, check=False,
    )
    assert built.returncode == 0, built.stderr
    assert (target / "gainloom" / "codegen_templates" / "table.c.j2").is_file()
    # run from elsewhere, with only the installed copy (and the venv's dependencies) importable
    env = dict(os.environ, PYTHONPATH=str(target))
    ran = subprocess.run([sys.executable, "-c", SCRIPT], cwd=tmp_path, env=env, capture_output=True, text=True,
                         check=False)
    assert ran.returncode == 0, ran.stderr
    found, size = ran.stdout.split()
    assert Path(found) == target / "gainloom" / "codegen_templates"
    assert int(size) > 1000

"""Product families (``gainloom family``): each variant's loop against a closed
form, the folders and index, located errors in the variants file, the output
rules of ``design``.

Closed form (textbook, from memory): b/(s + a) under ZOH at period T is
b/a (1 - phi)/(z - phi), phi = exp(-a T) (checked against
scipy.signal.cont2discrete below); with P control kp the closed-loop pole is
z = phi - kp b/a (1 - phi).  So the pole each variant's log reports must be
the one of *its* b, which the test computes from the variants file alone.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.signal
import yaml

from gainloom.cli import main
from gainloom.errors import ScheduleError
from gainloom.job.family_job import run_family
from gainloom.outputs import OutputConflictError, sha256_bytes

TS = 1.0e-3
SPEEDS = (0.0, 500.0, 1000.0)

BASE = f"""\
# invented first-order loop for the family tests
name: first-order-family
variables:
  - name: speed
    unit: rpm
    values: [0, 500, 1000]
parameters:
  a: "100 + 0.05 * speed"   # pole, 1/s
  b: 1500                   # gain, 1/s
plant:
  transfer_function:
    numerator: ["b"]
    denominator: [1, "a"]
sampling:
  period: {TS}
  method: zoh
  delay: 0
controller:
  structure: p
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 300}}
  output_limits: [-10, 10]
specs:
  max_pole_radius: 0.8
  max_gain: 2
codegen:
  prefix: fo
"""

#: b of each variant; "weak" cannot reach the radius at speed 0 within max_gain.
VARIANTS_CSV = """\
# invented product line
name,b
weak,50
strong,"3000"
base,
"""

FAST = {"compile": False, "target": False, "simulate": False, "workers": 1}


@pytest.fixture()
def files(tmp_path):
    schedule = tmp_path / "line.yaml"
    schedule.write_text(BASE, encoding="utf-8")
    variants = tmp_path / "variants.csv"
    variants.write_text(VARIANTS_CSV, encoding="utf-8")
    return schedule, variants


def _closed_loop_pole(a: float, b: float, kp: float) -> float:
    phi = math.exp(-a * TS)
    return phi - kp * b / a * (1.0 - phi)


def test_zoh_closed_form_matches_scipy():
    # scipy.signal.cont2discrete (ZOH) against the closed form used above
    a, b = 125.0, 3000.0
    num, den, _ = scipy.signal.cont2discrete(([b], [1.0, a]), TS, method="zoh")
    phi = math.exp(-a * TS)
    assert den[1] == pytest.approx(-phi, rel=1e-12)
    assert num[0][-1] == pytest.approx(b / a * (1 - phi), rel=1e-12)


def test_each_variant_designs_its_own_plant(files, tmp_path):
    schedule, variants = files
    result = run_family(schedule, variants, tmp_path / "out", **FAST)
    index = result.index
    assert [v["name"] for v in index["variants"]] == ["weak", "strong", "base"]
    b_of = {"weak": 50.0, "strong": 3000.0, "base": 1500.0}
    for entry in index["variants"]:
        folder = tmp_path / "out" / entry["name"]
        log = json.loads((folder / "verification.json").read_text())
        gains = yaml.safe_load((folder / "gains.yaml").read_text())
        # the variant's schedule is in its folder, and the gains file names exactly those bytes
        assert gains["schedule"]["sha256"] == sha256_bytes((folder / "line.yaml").read_bytes())
        assert (folder / "fo.h").is_file() and (folder / "fo.c").is_file()
        for p, speed in enumerate(SPEEDS):
            a = 100.0 + 0.05 * speed
            kp = gains["coefficients"]["kp"][p]
            pole = log["points"][p]["poles_z"][0][0]
            assert pole == pytest.approx(_closed_loop_pole(a, b_of[entry["name"]], kp), rel=1e-9, abs=1e-12)
        assert entry["files"] == {n: sha256_bytes((folder / n).read_bytes()) for n in entry["files"]}
    # weak: the pole of b = 50 needs kp = (phi - 0.8) a / (b (1 - phi)) = 2.2 > max_gain 2 at speed 0
    weak = index["variants"][0]
    phi = math.exp(-100.0 * TS)
    assert (phi - 0.8) * 100.0 / (50.0 * (1 - phi)) > 2.0
    assert not weak["passed"] and weak["binding"] == {"max_pole_radius": ["speed=0 rpm"]}
    assert index["variants"][1]["passed"] and not index["passed"]
    assert result.exit_code == 1
    md = (tmp_path / "out" / "family.md").read_text()
    assert "**2 of 3 variants pass every stage.**" in md and "[weak](weak/verification.md)" in md


def test_yaml_variants_give_the_same_designs_and_workers_do_not_matter(files, tmp_path):
    schedule, variants = files
    as_yaml = tmp_path / "variants.yaml"
    as_yaml.write_text("variants:\n  - {name: weak, b: 50}\n  - {name: strong, b: '3000'}\n")
    variants.write_text("name,b\nweak,50\nstrong,3000\n")
    one = run_family(schedule, variants, tmp_path / "csv", **FAST).index
    two = run_family(schedule, as_yaml, tmp_path / "yaml", **{**FAST, "workers": 2}).index
    for left, right in zip(one["variants"], two["variants"]):
        # every file is the same except the schedule's header comment naming the variants file
        same = {n: h for n, h in left["files"].items() if n not in ("line.yaml", "gains.yaml", "verification.json",
                                                                     "verification.md", "fo.h", "fo.c")}
        assert same == {n: right["files"][n] for n in same}
        assert left["per_point"] == right["per_point"]


@pytest.mark.parametrize(("text", "where", "expected"), [
    ("name,bb\nv1,3\n", ":2:4: v1.bb:", "unknown parameter 'bb'; known: a, b (did you mean 'b'?)"),
    ("name,b\nv1,3 +\n", ":2:", "parameter 'b' of variant 'v1'"),
    ("name,b\nv1,3 * c\n", ":2:8: v1.b:", "unknown name 'c'"),
    ("name,b\nv1,3\nV1,4\n", ":3:1:", "variant name 'V1' is used twice (first at line 2)"),
    ("name,b\n1st,3\n", ":2:1:", "must start with a letter"),
    ("name,b\nv1,3,4\n", ":2:", "row has 3 cells but the header has 2 columns"),
    ("name;b\nv1;3\n", ":1:", "separate columns with commas"),
    ("name,b,b\nv1,3,4\n", ":1:8:", "column 'b' appears twice"),
    ("name,b\nv1,1/(speed-500)\n", ":2:4: v1.b:", "infinite (division by zero or overflow) at speed=500 rpm"),
])
def test_bad_variants_are_located_errors(files, tmp_path, capsys, text, where, expected):
    schedule, variants = files
    variants.write_text(text, encoding="utf-8")
    code = main(["family", str(schedule), "--variants", str(variants), "--out", str(tmp_path / "out"),
                 "--no-compile", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert f"variants.csv{where}" in err and expected in err
    assert "Traceback" not in err and not (tmp_path / "out").exists()


def test_yaml_variant_errors_are_located(files, tmp_path):
    schedule, _ = files
    bad = tmp_path / "v.yaml"
    bad.write_text("variants:\n  - name: v1\n    b: [1, 2]\n")
    with pytest.raises(ScheduleError) as caught:
        run_family(schedule, bad, tmp_path / "out", **FAST)
    assert (caught.value.line, caught.value.key_path) == (3, "v1.b")
    assert "found a list" in caught.value.message


def test_a_foreign_file_stops_the_whole_family_before_any_write(files, tmp_path):
    schedule, variants = files
    variants.write_text("name,b\nbase,\nstrong,3000\n")
    out = tmp_path / "out"
    (out / "strong").mkdir(parents=True)
    (out / "strong" / "fo.c").write_text("/* mine */\n")
    with pytest.raises(OutputConflictError, match="strong/fo.c was not written by gainloom"):
        run_family(schedule, variants, out, **FAST)
    assert sorted(p.name for p in out.iterdir()) == ["strong"]
    assert (out / "strong" / "fo.c").read_text() == "/* mine */\n"
    run_family(schedule, variants, out, force=True, **FAST)
    assert (out / "strong" / "fo.c").read_text() != "/* mine */\n"


def test_cli_prints_the_summary_and_exit_code(files, tmp_path, capsys):
    schedule, variants = files
    code = main(["family", str(schedule), "--variants", str(variants), "--out", str(tmp_path / "out"),
                 "--no-compile", "--no-simulate", "--quiet", "--workers", "1"])
    out = capsys.readouterr().out
    assert code == 1
    assert "family: 2/3 variants pass" in out and "CAUTION" in out
    assert np.array([line.startswith("weak") and "FAIL" in line for line in out.splitlines()]).any()

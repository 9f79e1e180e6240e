"""``gainloom locus`` run as a user would: in a subprocess."""

import json
import math
import os
import subprocess
import sys

import numpy as np
import pytest
import scipy.signal

from gainloom.cli.arguments import parse_coefficients
from gainloom.errors import InputError
from gainloom.safety import CAUTION


def run_cli(*args, cwd=None):
    # Build the child's import path from ours, so the test works both with
    # PYTHONPATH=src and with an installed package.
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in sys.path if p)
    env["MPLBACKEND"] = "Agg"
    return subprocess.run(
        [sys.executable, "-m", "gainloom", "locus", *args],
        capture_output=True, text=True, env=env, cwd=cwd, timeout=120,
    )


def test_table_output_names_the_facts():
    result = run_cli("--num", "1", "--den", "1 3 2 0", "--damping", "0.5")
    assert result.returncode == 0, result.stderr
    out = result.stdout
    for heading in ("Open-loop poles and zeros", "Real-axis segments", "Asymptotes", "Breakaway",
                    "Departure and arrival angles", "Stable gain intervals", CAUTION):
        assert heading in out
    # Breakaway of K/(s(s+1)(s+2)) at -1 + 1/sqrt(3), K = 0.3849 (textbook, from memory).
    assert "-0.42265" in out and "0.3849" in out
    # zeta = 0.5 ray meets the locus at s = -1/3 + j/sqrt(3) (angle condition,
    # solved by hand: s(s+1)(s+2) real there), K = -s(s+1)(s+2) = 28/27.
    s = complex(-1 / 3, 1 / math.sqrt(3))
    assert abs((s * (s + 1) * (s + 2)).imag) < 1e-12
    assert f"zeta >= 0.5: (0, {28 / 27:.6g})" in out
    # Imaginary-axis crossing w = sqrt(2) at K = 6 (Routh, from memory).
    assert "Crossings of the imaginary axis" in out and "1.41421" in out and "(0, 6)" in out


def test_json_output_keys_and_values(capsys):
    from gainloom.cli import main

    assert main(["locus", "--num", "1,2", "--den", "[1, 2, 3]", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    for key in ("plane", "poles", "zeros", "real_axis_segments", "asymptotes", "breakaways", "crossings",
                "departure_angles", "arrival_angles", "stable_gain_intervals", "discretization"):
        assert key in data
    assert data["plane"] == "s" and data["gain_sign"] == "positive"
    # Break-in of K(s+2)/(s^2+2s+3) at -2 - sqrt(3) (from memory).
    assert data["breakaways"][0]["re"] == pytest.approx(-2 - math.sqrt(3))


def test_sampled_loop_is_discretised_first():
    # With --ts the plant is sampled (ZOH); the z-plane poles of
    # 1/(s (s + 1)) are 1 and exp(-ts) (pole mapping; scipy cont2discrete
    # as the independent reference for the whole polynomial).
    result = run_cli("--num", "1", "--den", "1 1 0", "--ts", "0.1", "--json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["plane"] == "z" and data["ts"] == 0.1
    assert data["sampling"] == {"method": "zoh", "ts": 0.1, "delay_samples": 0.0, "prewarp": None}
    _, den_ref, _ = scipy.signal.cont2discrete(([1.0], [1.0, 1.0, 0.0]), 0.1, method="zoh")
    np.testing.assert_allclose(data["den"], den_ref, rtol=1e-9, atol=1e-12)
    poles = sorted(p["re"] for p in data["poles"])
    assert poles == pytest.approx([math.exp(-0.1), 1.0], abs=1e-9)


def test_discrete_flag_takes_z_polynomials_as_given(capsys):
    from gainloom.cli import main

    assert main(["locus", "--num", "1 0.5", "--den", "1 -1.5 0.5", "--ts", "0.01", "--discrete", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["den"] == [1.0, -1.5, 0.5]


def test_plot_is_a_png(tmp_path, capsys):
    # In-process (matplotlib is slow to import; the subprocess path is
    # covered below).
    from gainloom.cli import main

    target = tmp_path / "locus.png"
    assert main(["locus", "--num", "1", "--den", "1 3 2 0", "--damping", "0.5", "--plot", str(target)]) == 0
    assert "plot written" in capsys.readouterr().out
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification)


def test_z_plot_is_byte_identical_across_processes(tmp_path, capsys):
    from gainloom.cli import main

    args = ["--num", "1", "--den", "1 1 0", "--ts", "0.1", "--delay", "1", "--damping", "0.5", "0.7", "--plot"]
    first, second = tmp_path / "a.png", tmp_path / "b.png"
    result = run_cli(*args, str(first))
    assert result.returncode == 0, result.stderr
    assert main(["locus", *args, str(second)]) == 0
    capsys.readouterr()
    assert first.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert first.read_bytes() == second.read_bytes()
    assert b"Software" not in first.read_bytes() and b"matplotlib" not in first.read_bytes()


def test_bad_input_exits_2_with_one_line_in_a_subprocess():
    result = run_cli("--num", "1 x", "--den", "1 2")
    assert result.returncode == 2
    assert "cannot read 'x'" in result.stderr
    assert "Traceback" not in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize(
    "args,message",
    [
        (("--num", "1 2 3", "--den", "1 2"), "improper"),
        (("--num", "1", "--den", "1 2", "--discrete"), "--ts"),
        (("--num", "1", "--den", "1 2", "--ts", "0.1", "--method", "zho"), "did you mean 'zoh'"),
        (("--num", "1", "--den", "1 2", "--delay", "1"), "--ts"),
        (("--num", "1", "--den", "1 2", "--damping", "1.5"), "damping"),
        (("--num", "1", "--den", "1 2", "--ts", "0"), "--ts"),
    ],
)
def test_bad_input_exits_2(args, message, capsys):
    # Same dispatch as the subprocess, in-process to keep the suite fast.
    from gainloom.cli import main

    assert main(["locus", *args]) == 2
    err = capsys.readouterr().err
    assert message in err


def test_parse_coefficients_never_evaluates():
    assert parse_coefficients(" 1, -2.5e-3  4 ", "num").tolist() == [1.0, -0.0025, 4.0]
    with pytest.raises(InputError):
        parse_coefficients("__import__('os')", "num")

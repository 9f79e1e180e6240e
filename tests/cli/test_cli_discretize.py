"""``gainloom discretize`` run as a user runs it: in a subprocess."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest
import scipy.signal as signal


def _run(*args):
    # Build the child's import path from ours, so this works both with
    # PYTHONPATH=src and with an installed package.
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run(
        [sys.executable, "-m", "gainloom", "discretize", *args],
        capture_output=True,
        text=True,
        env=env,
        timeout=60,
    )


def test_json_output_matches_scipy_zoh_with_a_sample_of_delay():
    result = _run(
        "--num", "1 2", "--den", "1 3 2", "--ts", "1e-3", "--method", "zoh", "--delay", "1", "--json"
    )
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    # Reference: scipy.signal.cont2discrete zoh (reference library), times
    # z^-1 for the sample of delay.
    ref_num, ref_den, _ = signal.cont2discrete(([1, 2], [1, 3, 2]), 1e-3, method="zoh")
    ref_den = np.concatenate([ref_den, [0.0]])
    ref_num = np.concatenate([np.zeros(len(ref_den) - ref_num.shape[1]), ref_num.ravel()])
    np.testing.assert_allclose(data["den"], ref_den, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(data["num"], ref_num, rtol=1e-8, atol=1e-14)
    # ZOH is step invariant: DC gain of (s+2)/((s+1)(s+2)) is 1 (textbook fact).
    assert data["dc_gain"] == pytest.approx(1.0, rel=1e-9)
    poles = sorted(p["magnitude"] for p in data["poles"])
    # Poles: the delay pole at z = 0 and exp(-ts), exp(-2 ts) (ZOH pole map).
    np.testing.assert_allclose(poles, [0.0, np.exp(-2e-3), np.exp(-1e-3)], rtol=1e-12, atol=0)
    assert data["method"] == "zoh" and data["delay_samples"] == 1.0
    # ZOH of an order-n plant has n - 1 finite zeros (generic case, textbook
    # fact); one sample of delay adds a pole, so 3 - 1 = 2 zeros at infinity.
    assert data["zeros_at_infinity"] == 2 and len(data["zeros"]) == 1


def test_text_output_names_poles_zeros_and_dc_gain():
    result = _run("--num", "1", "--den", "1 0", "--ts", "0.01", "--method", "tustin")
    assert result.returncode == 0, result.stderr
    out = result.stdout
    assert "poles (z):" in out and "zeros (z):" in out
    # An integrator has an infinite DC gain (pole at z = 1).
    assert "DC gain: infinite" in out
    # Tustin of 1/s: (ts/2)(z + 1)/(z - 1) (closed form): zero at z = -1.
    assert "-1 " in out.split("zeros (z):")[1]


def test_prewarp_past_nyquist_is_one_line_and_exit_2():
    result = _run("--num", "1", "--den", "1 1", "--ts", "1e-3", "--method", "tustin", "--prewarp", "4000")
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "500 Hz" in lines[0] and "Traceback" not in result.stderr


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--num", "1 x", "--den", "1 1", "--ts", "1e-3"], "cannot read 'x' as a number"),
        (["--num", "1", "--den", "1 1", "--ts", "fast"], "--ts"),
        (["--num", "1", "--den", "1 1", "--ts", "nan"], "finite"),
        (["--num", "1", "--den", "1 1", "--ts", "1e-3", "--method", "zho"], "did you mean 'zoh'"),
        (["--num", "1", "--den", "1 1", "--ts", "1e-3", "--method", "foh", "--delay", "0.5"], "'zoh'"),
        (["--num", "1 2 3", "--den", "1 1", "--ts", "1e-3"], "improper"),
        (["--num", "1", "--den", "0 0", "--ts", "1e-3"], "zeros"),
    ],
)
def test_bad_input_exits_2_with_one_line(args, fragment):
    result = _run(*args)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0], result.stderr

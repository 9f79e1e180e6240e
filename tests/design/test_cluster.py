"""Work units on a Dask cluster: the same results bit for bit as the local
run, also when a worker is killed mid-run (Dask reruns its units), and a
clear message without Dask.

The cluster is a ``distributed.LocalCluster`` of two worker *processes*
(threads could not be killed the way a machine is lost).  The reference is
the local run of the same study or family: a unit's result depends only on
its data (per-point, per-block seeded streams, docs/tolerances.md), never on
where it ran.
"""

from __future__ import annotations

import os
import re
import signal
import sys

import numpy as np
import pytest

from gainloom.cli import main
from gainloom.design.cluster import CLUSTER_ENVIRONMENT, cluster_address
from gainloom.design.spread import run_study
from gainloom.errors import InputError
from gainloom.job.family_job import run_family

distributed = pytest.importorskip("distributed")

SCHEDULE = """\
name: first-order-cluster
description: first-order lag with spread gain and pole (invented, for the cluster tests)
variables:
  - name: speed
    unit: rpm
    values: [0, 250, 500, 750, 1000]
parameters:
  a: "100 + 0.05 * speed"
  b: 1500
plant:
  transfer_function:
    numerator: ["b"]
    denominator: [1, "a"]
sampling:
  period: 0.001
  method: zoh
  delay: 0
controller:
  structure: p
  strategy: dominant-pair
  target: {damping: 0.7, natural_frequency: 100}
  output_limits: [-10, 10]
specs:
  max_pole_radius: 0.5
  max_gain: 2
tolerances:
  parameters: {b: 0.4, a: [-0.2, 0.1]}
  samples: 1500
  distribution: normal
  seed: 7
codegen:
  prefix: cl
"""

GAINS = """\
format: gainloom-gains/1
structure: p
axes:
  - {name: speed, unit: rpm, values: [0, 250, 500, 750, 1000]}
coefficients:
  kp: [1.0, 0.95, 0.9, 0.85, 0.8]
sample_period: [0.001, 0.001, 0.001, 0.001, 0.001]
output_limits: [-10, 10]
"""

#: Small units so there are many of them: 1 point x 1 block of 256 draws (30 units).
CHUNKS = {"chunk_points": 1, "chunk_blocks": 1}


def _cluster():
    return distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                                    silence_logs=50)


@pytest.fixture(scope="module")
def cluster():
    with _cluster() as running:
        yield running


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("study")
    schedule = folder / "cluster.yaml"
    schedule.write_text(SCHEDULE, encoding="utf-8")
    gains = folder / "gains.yaml"
    gains.write_text(GAINS, encoding="utf-8")
    return schedule, gains


@pytest.fixture(scope="module")
def local(study):
    """The reference: the same study on this process."""
    return run_study(*study, workers=1, **CHUNKS)


def _same(left, right) -> None:
    for field in ("point_index", "draws", "violations", "any_violations", "worst_draw"):
        assert np.array_equal(getattr(left.totals, field), getattr(right.totals, field)), field
    for field in ("worst_badness", "worst_value", "worst_factors"):
        assert np.array_equal(getattr(left.totals, field), getattr(right.totals, field), equal_nan=True), field


def test_study_on_the_cluster_is_bit_identical(cluster, study, local):
    schedule, gains = study
    assert 0 < local.totals.violations.sum() < local.totals.draws.sum()  # something to count, not everything
    seen = []
    remote = run_study(schedule, gains, cluster=cluster.scheduler_address, progress=lambda *a: seen.append(a),
                       **CHUNKS)
    _same(local, remote)
    assert seen[0] == ("tolerance study", 0, 5 * 1500) and seen[-1] == ("tolerance study", 5 * 1500, 5 * 1500)
    assert len(seen) == 1 + 5 * 6  # one report per finished unit: 5 points x 6 blocks (the last one 220 draws)


def test_a_killed_worker_does_not_change_the_result(study, local):
    schedule, gains = study
    with _cluster() as running, distributed.Client(running, set_as_default=False) as client:
        pids = sorted(client.run(os.getpid).values())
        killed = []

        def kill_one(stage, done, total):
            if done and not killed:  # mid-run: the first unit is back, 29 are not
                os.kill(pids[0], signal.SIGKILL)
                killed.append(pids[0])

        notes: list[str] = []
        remote = run_study(schedule, gains, cluster=running.scheduler_address, progress=kill_one, notes=notes,
                           **CHUNKS)
    assert killed
    _same(local, remote)
    # at least the killed worker left; on a loaded machine a second one may miss its heartbeat and
    # be dropped too, which must not change the result either
    (note,) = notes
    left = re.search(r"(\d+) worker\(s\) left during the run", note)
    assert left and int(left.group(1)) >= 1 and "run again" in note


def test_family_on_the_cluster_writes_the_same_files(cluster, tmp_path):
    schedule = tmp_path / "line.yaml"
    schedule.write_text(SCHEDULE, encoding="utf-8")
    variants = tmp_path / "variants.csv"
    variants.write_text("name,b\nstrong,2500\n", encoding="utf-8")  # one variant is one unit
    options = {"compile": False, "target": False, "simulate": False}
    local = run_family(schedule, variants, tmp_path / "local", workers=1, **options).index
    remote = run_family(schedule, variants, tmp_path / "remote", cluster=cluster.scheduler_address, **options).index
    assert local == remote
    for variant in local["variants"]:
        for name in variant["files"]:
            left = (tmp_path / "local" / variant["name"] / name).read_bytes()
            assert left == (tmp_path / "remote" / variant["name"] / name).read_bytes(), name


def test_spread_cli_on_the_cluster(cluster, study, capsys):
    schedule, gains = study
    code = main(["spread", str(schedule), "--gains", str(gains), "--cluster", cluster.scheduler_address, "--quiet"])
    out = capsys.readouterr().out
    assert code == 1 and "tolerance study: 1500 normal draws per point" in out


def test_without_dask_cluster_says_what_to_install(study, monkeypatch, capsys):
    schedule, gains = study
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    code = main(["spread", str(schedule), "--gains", str(gains), "--cluster", "tcp://127.0.0.1:1", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "pip install 'gainloom[cluster]'" in err and "Traceback" not in err


def test_cluster_address_from_option_or_environment(monkeypatch):
    monkeypatch.delenv(CLUSTER_ENVIRONMENT, raising=False)
    assert cluster_address(None) is None
    monkeypatch.setenv(CLUSTER_ENVIRONMENT, " tcp://127.0.0.1:8786 ")
    assert cluster_address(None) == "tcp://127.0.0.1:8786"
    assert cluster_address("tcp://127.0.0.1:9000") == "tcp://127.0.0.1:9000"
    with pytest.raises(InputError, match="needs the address"):
        cluster_address("  ")


def test_no_scheduler_is_a_located_input_error(study, capsys, monkeypatch):
    schedule, gains = study
    monkeypatch.setattr("gainloom.design.cluster.CONNECT_TIMEOUT", 2)  # nothing listens there: do not wait 30 s
    code = main(["spread", str(schedule), "--gains", str(gains), "--cluster", "tcp://127.0.0.1:1", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "cannot reach the Dask scheduler at tcp://127.0.0.1:1" in err

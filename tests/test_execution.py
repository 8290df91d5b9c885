"""The execution layer: task maps keep task order, and a pool or a Dask cluster gives the serial numbers.

Common practice, no source: the same computation in another process must give the same bits
(one BLAS thread everywhere), so equality is exact.
"""

import sys
import threading

import pytest

from tdhf.deck import parse_deck
from tdhf.driver import run_deck
from tdhf.errors import InputError
from tdhf.execution import DaskCluster, ProcessPool, default_workers, serial, start_method, task_map
from tdhf.properties.dispersion import dispersion_table

PAIR_DECK = '[atom]\nelement = "He"\n[dispersion]\nsystems = ["Be"]\nquadrature_points = 16\n'


def _square(x):
    return x * x


def test_serial_and_pool_keep_the_task_order():
    tasks = [(k,) for k in range(7)]
    assert list(serial(_square, tasks)) == [k * k for k in range(7)]
    with ProcessPool(2) as pool:
        assert list(pool(_square, tasks)) == [k * k for k in range(7)]
    with task_map(workers=1) as run:
        assert run is serial
    assert default_workers() >= 1


def test_workers_fork_only_from_a_single_threaded_process():
    """Common practice, no source: a fork copies only the forking thread, so a lock held by another
    thread would stay held in the child for ever; with a second thread running the pool spawns."""
    assert start_method() == "fork"  # pytest runs the tests in one thread
    release = threading.Event()
    other = threading.Thread(target=release.wait)
    other.start()
    try:
        assert start_method() == "spawn"
        with ProcessPool(2) as pool:  # and a spawned pool gives the same answers
            assert list(pool(_square, [(3,), (4,)])) == [9, 16]
    finally:
        release.set()
        other.join()


def test_a_pool_with_no_tasks_starts_no_process():
    with ProcessPool(2) as pool:
        assert pool._pool is None
    with pytest.raises(RuntimeError, match="outside its with block"):
        list(pool(_square, [(1,)]))


def test_bad_worker_counts_and_a_missing_dask_are_one_line_errors(monkeypatch):
    for bad in (0, -1, 1.5, True):
        with pytest.raises(InputError, match="--workers"):
            ProcessPool(bad)
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if the [cluster] extra were not installed
    with pytest.raises(InputError, match=r"pip install 'tdhf\[cluster\]'"):
        with DaskCluster("tcp://127.0.0.1:1"):
            pass


def test_an_unreachable_scheduler_is_an_input_error():
    pytest.importorskip("distributed")
    with pytest.raises(InputError, match="cannot reach the Dask scheduler"):
        with DaskCluster("tcp://127.0.0.1:1", timeout=1):
            pass


def test_dispersion_handed_to_a_pool_before_the_response_gives_the_serial_numbers():
    """The driver starts the dispersion responses on the pool, solves the response section, then
    collects: the same tasks, so the same bits as one after the other."""
    deck = parse_deck('[atom]\nelement = "He"\n[response]\nmultipoles = [1, 2]\nfrequencies = [0.0, 0.1]\n'
                      '[dispersion]\npartners = ["Be"]\nquadrature_points = 8\n')
    alone = run_deck(deck)
    with ProcessPool(2) as pool:
        spread = run_deck(deck, map_tasks=pool)
    assert spread.dispersion == alone.dispersion and spread.polarizability_tables == alone.polarizability_tables
    assert spread.polarizabilities == alone.polarizabilities and spread.warnings == alone.warnings


@pytest.mark.slow
def test_a_pool_gives_the_serial_numbers_of_a_deck():
    deck = parse_deck(PAIR_DECK)
    alone = run_deck(deck)
    with ProcessPool(2) as pool:
        spread = run_deck(deck, map_tasks=pool)
    assert spread.dispersion == alone.dispersion and spread.polarizability_tables == alone.polarizability_tables


@pytest.mark.slow
def test_a_dask_local_cluster_gives_the_serial_numbers(helium, beryllium):
    distributed = pytest.importorskip("distributed")
    serial_result = dispersion_table([helium, beryllium], quadrature_points=16)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        with DaskCluster(cluster.scheduler_address) as dask_map:
            remote = dispersion_table([helium, beryllium], quadrature_points=16, map_tasks=dask_map)
    assert remote == serial_result

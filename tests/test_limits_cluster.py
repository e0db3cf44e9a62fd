"""A 10,000-band upper-limit run on a real dask.distributed cluster equals the serial run.

Issue 9: results are identical, bit for bit, whatever the executor (the seeds of the chunks
come from numpy.random.SeedSequence.spawn in the parent, never from the worker).
"""

import pathlib

import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.report.chain import simulate_results
from cwlimits.searchspace.searchsetup import SearchSetup

DEMO = pathlib.Path(__file__).resolve().parent.parent / "target_lists" / "demo.csv"


def test_ten_thousand_bands_on_a_local_cluster_equal_serial():
    distributed = pytest.importorskip("distributed")
    target = cwlimits.load_targets(DEMO).target("Fict Quill")
    setup = SearchSetup(t_seg=5 * u.day, n_seg=6, band=(100 * u.Hz, 600 * u.Hz),
                        band_width=0.05 * u.Hz)
    model = cwlimits.signal_model(setup, "second-gen-fit", target)
    assert len(model) == 10000
    results = simulate_results(model, rng=5)
    options = dict(method="bayes", rng=9, n_astro=200, chunk_size=2500)
    serial = cwlimits.upper_limits(results, setup, target, **options)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=":0") as cluster, \
            distributed.Client(cluster, set_as_default=False) as client:
        clustered = cwlimits.upper_limits(results, setup, target, executor=client, **options)
    for column in ("h0_limit", "eps_limit", "alpha_limit"):
        assert np.array_equal(serial[column].value, clustered[column].value), column
    assert np.all(np.isfinite(serial["h0_limit"].value))

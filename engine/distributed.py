"""The same group work on Dask, for data one machine cannot hold (a network's full history, say).

Optional: needs ``dask[dataframe]`` (and ``distributed`` for a cluster), installed
with ``pip install 'unbend[dask]'`` and imported only when this module is used.

The rows are shuffled so that every group sits whole in one partition; each
partition then runs exactly the per-group code of :func:`unbend.fit_groups`
(:class:`unbend.groups.LocalSource` on that partition's rows), and the common
powers come from each partition's per-group sums reduced across partitions:
for every power tried, each partition sends back one number (the log of its
summed residual sum of squares), and the driver adds them up.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ._validation import UnbendError, check_level, check_number, check_power
from .groups import (GroupFit, LocalSource, Profile, _label_key, analyse, locator_groups, read_rows,
                     subset_source)

__all__ = ["fit_groups_dask", "DaskSource"]


def _dask():
    try:
        import dask
        from dask import delayed
    except ImportError:  # pragma: no cover - depends on the installation
        raise UnbendError("fit_groups_dask needs Dask: pip install 'unbend[dask]' (dask[dataframe] and "
                          "distributed).") from None
    return dask, delayed


def fit_groups_dask(data, y, x, by, *, y_power=None, x_power=None, y_start=0.0, x_start=0.0, level=0.95,
                    own_powers=True) -> GroupFit:
    """:func:`unbend.fit_groups` on a Dask DataFrame: one re-expression for every group, a line per group.

    Parameters
    ----------
    data : dask.dataframe.DataFrame
        The rows, in as many partitions as you like.
    y, x, by : str
        Column names: the response, the predictor and the group label.
    y_power, x_power, y_start, x_start, level, own_powers
        As for :func:`unbend.fit_groups`.

    Returns
    -------
    GroupFit
        The same result as :func:`unbend.fit_groups` on the same rows (the
        tests hold the two to 1e-9). ``skipped`` is empty (row numbers have no
        meaning across partitions); ``skipped_reasons`` counts the skipped rows.
        ``predict`` and ``line`` fetch the one group's rows from the cluster.

    Notes
    -----
    Runs on whatever Dask scheduler is active: a ``dask.distributed.Client``
    connected to a cluster, or Dask's local threads. The shuffled partitions
    are kept in the cluster's memory while the result is alive.

    Examples
    --------
    >>> import dask.dataframe as dd                                   # doctest: +SKIP
    >>> from dask.distributed import Client                           # doctest: +SKIP
    >>> client = Client("tcp://scheduler-address:8786")               # doctest: +SKIP
    >>> gf = fit_groups_dask(dd.read_parquet("network/"), "load", "flow", "station")  # doctest: +SKIP
    """
    dask, delayed = _dask()
    level = check_level(level)
    ys = check_number(y_start, "y_start")
    xs = check_number(x_start, "x_start")
    yp = None if y_power is None else check_power(y_power, "y_power")
    xp = None if x_power is None else check_power(x_power, "x_power")
    cols = list(getattr(data, "columns", []))
    for name, col in (("y", y), ("x", x), ("by", by)):
        if col not in cols:
            raise UnbendError(f"{name}={col!r} is not a column of the data; the columns are {cols}.")
    parts = data[[by, y, x]].shuffle(on=by).to_delayed()
    sources = dask.persist(*[delayed(_read_part)(p, y, x, by, ys, xs) for p in parts])
    src = DaskSource(sources, ys, xs)
    return analyse(src, yp, xp, ys, xs, level, own=bool(own_powers), skipped=(), reasons=src.reasons)


# ------------------------------------------------------------------------------- on each partition

def _read_part(frame: pd.DataFrame, y, x, by, ys, xs) -> LocalSource:
    return LocalSource(read_rows(frame[y].to_numpy(), frame[x].to_numpy(), frame[by]), ys, xs)


def _info(src: LocalSource):
    return (src.N, src.G, src.n_skipped, dict(src.rows.reasons), list(src.block.labels),
            src.block.counts.copy())


def _domain_error(src: LocalSource, t, what):
    return src.domain_error(t, what)


def _y_mean_log(src: LocalSource, other):
    return src.y_mean_log(other)


def _lse_many(src: LocalSource, what, other, ps, m):
    return src.lse_many(what, other, ps, m)


def _table(src: LocalSource, y_power, x_power, level, own):
    return src.table(y_power, x_power, level, own)


def _rows_for(src: LocalSource, labels):
    b = src.block
    keep = np.flatnonzero([any(v == w and type(v) is type(w) for w in labels) for v in b.labels])
    r = b.rows_of(keep)
    return b.y[r], b.x[r], np.repeat(b.labels[keep], b.counts[keep])


def _rows_of(src: LocalSource, label):
    return src.rows_of(label)


def _release(src: LocalSource):
    src.release()
    return True


# ------------------------------------------------------------------------------- the driver

class DaskSource:
    """The groups of every partition, seen as one source by :func:`unbend.groups.analyse`."""

    def __init__(self, parts, ys, xs):
        self.parts = parts
        self.ys, self.xs = ys, xs
        info = self._map(_info)
        self.N = int(sum(i[0] for i in info))
        self.G = int(sum(i[1] for i in info))
        self.n_skipped = int(sum(i[2] for i in info))
        reasons: dict = {}
        for i in info:
            for k, v in i[3].items():
                reasons[k] = reasons.get(k, 0) + v
        self.reasons = dict(sorted(reasons.items()))
        labels = [v for i in info for v in i[4]]
        counts = np.concatenate([i[5] for i in info]) if info else np.zeros(0, np.int64)
        order = sorted(range(len(labels)), key=lambda k: _label_key(labels[k]))
        self.labels = np.array([labels[k] for k in order], dtype=object)
        self.counts = counts[order] if len(order) else counts
        self._locator = "unset"

    def _map(self, fn, *args):
        dask, delayed = _dask()
        return dask.compute(*[delayed(fn)(p, *args) for p in self.parts])

    def check(self, t, what) -> None:
        found = [(vmin, err) for err, vmin in self._map(_domain_error, t, what) if err is not None]
        if found:
            raise min(found, key=lambda e: e[0])[1]

    def profile(self, what, other):
        m = 0.0
        if what == "y":
            parts = self._map(_y_mean_log, other)
            m = sum(a for a, _ in parts) / sum(n for _, n in parts)
        return Profile(lambda ps: list(self._map(_lse_many, what, other, ps, m)), what, self.N, m)

    def locator(self):
        """The same seeded subset of whole groups as on one machine, fetched to this machine."""
        if self._locator != "unset":
            return self._locator
        self._locator = None
        take = locator_groups(self.labels, self.counts, self.N)
        if take is not None:
            chosen = list(self.labels[take])
            got = self._map(_rows_for, chosen)
            yy = np.concatenate([g[0] for g in got])
            xx = np.concatenate([g[1] for g in got])
            gg = np.concatenate([g[2] for g in got])
            local = LocalSource(read_rows(yy, xx, gg), self.ys, self.xs)
            self._locator = subset_source(local.block, self.ys, self.xs)
        return self._locator

    def table(self, y_power, x_power, level, own=True):
        got = self._map(_table, y_power, x_power, level, own)
        table = pd.concat([t for t, _ in got], ignore_index=True)
        sums = pd.concat([s for _, s in got], ignore_index=True)
        order = sorted(range(len(table)), key=lambda k: _label_key(table["group"].iloc[k]))
        return table.iloc[order].reset_index(drop=True), sums.iloc[order].reset_index(drop=True)

    def release(self) -> None:
        self._map(_release)
        self._locator = None

    def rows_of(self, label):
        got = self._map(_rows_of, label)
        return np.concatenate([g[0] for g in got]), np.concatenate([g[1] for g in got])

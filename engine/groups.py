"""Many series at once: one re-expression for every group, a line per group, and whether the slopes differ.

One power for y (and one for x) is chosen for all groups together from the
Box–Cox profile likelihood of a model with its own intercept and slope in
every group, so that every group's slope is on the same scale and slopes can
be compared. Each group then gets its line, its residual checks and its own
power estimate with an interval, beside the common one, so that a group that
wants another power stands out. Everything per group comes from segment sums
over rows sorted by group (see :mod:`unbend._blocks`), not a loop over groups.
"""
from __future__ import annotations

import numbers
import zlib
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
from . import _dist as stats

from . import _blocks as B
from ._likelihood import SEARCH_LIMIT
from ._validation import DomainError, UnbendError, as_matrix, as_vector, check_level, check_number, check_power
from .diagnostics import ALPHA, PATTERN_ALPHA, verdict
from .express import LADDER, Reexpression, rung_label
from .power import PowerSuggestion, _suggestion

__all__ = ["GroupFit", "CommonPower", "fit_groups", "TABLE_COLUMNS"]

#: Columns of :attr:`GroupFit.table`, in order.
TABLE_COLUMNS = ["group", "n", "skipped", "used", "reason", "intercept", "slope", "slope_low", "slope_high",
                 "se_intercept", "se_slope", "resid_sd", "r2", "curvature_p", "pattern_p", "spread_p",
                 "normality_p", "verdict", "y_power", "own_y_power", "own_y_low", "own_y_high", "own_y_differs",
                 "x_power", "own_x_power", "own_x_low", "own_x_high", "own_x_differs", "x_min", "x_max"]

#: Above this many rows, a seeded subset of whole groups finds where to look first.
LOCATE_ABOVE = 40_000
LOCATE_ROWS = 20_000
#: Each group's own power is found to about 1e-8 and its interval ends to 1e-9 (they are read against the
#: common power, not used in further arithmetic); the common powers to about 1e-10 and 1e-11.
OWN_TOL, OWN_XTOL = 1e-4, 1e-9
_KEEP_TERMS = 3  # sets of per-group sums kept per block
_ROUNDS = 4  # at most this many alternations between the y power and the x power
_SKIP_LIMIT = 10_000  # skipped rows listed one by one, at most


# ----------------------------------------------------------------------------- results

@dataclass(frozen=True)
class CommonPower:
    """The powers used for every group, with the profile-likelihood suggestion behind each.

    Attributes
    ----------
    y_power, x_power : float
        The powers every group's line uses.
    y, x : PowerSuggestion or None
        The suggestion from the joint profile likelihood (a line per group):
        for y given x at ``x_power``, for x given y at ``y_power``. None for a
        power that was given (it is used as given).
    y_pinned, x_pinned : bool
        True when the power was given rather than chosen.
    note : str
        How the pair was reached, in words.
    """

    y_power: float
    x_power: float
    y: PowerSuggestion | None
    x: PowerSuggestion | None
    y_pinned: bool
    x_pinned: bool
    note: str

    def rows(self) -> list[tuple[str, object]]:
        out: list[tuple[str, object]] = [("y power used", self.y_power), ("y re-expressed as", rung_label(self.y_power)),
                                         ("y power given", "yes" if self.y_pinned else "no"),
                                         ("x power used", self.x_power), ("x re-expressed as", rung_label(self.x_power)),
                                         ("x power given", "yes" if self.x_pinned else "no")]
        for s in (self.y, self.x):
            if s is not None:
                out += [(f"{s.what} power estimate (all groups)", s.estimate),
                        (f"{s.what} power {s.level * 100:g}% low", s.low),
                        (f"{s.what} power {s.level * 100:g}% high", s.high),
                        (f"{s.what} rung from the estimate", s.rung), (f"{s.what} note", s.note)]
        if self.note:
            out.append(("how the powers were chosen", self.note))
        return out


@dataclass(frozen=True)
class GroupFit:
    """Lines for many groups on one common scale; predicts and summarises itself.

    Attributes
    ----------
    common : CommonPower
        The powers for y and x chosen for all groups together, with intervals.
    table : pandas.DataFrame
        One row per group (columns :data:`TABLE_COLUMNS`), groups in sorted order.
        Groups left out (too few rows, x or y that does not vary) have
        ``used`` False, the reason, and blank numbers.
    equal_slopes_p, equal_slopes_f : float
        F test of one slope for every group against one slope per group (each
        group keeps its own intercept), on the common scale.
    equal_slopes_df : tuple of int
        Its degrees of freedom (groups used - 1, rows used - 2 x groups used).
    common_slope : float
        The one slope of that test's smaller model.
    n, n_groups, n_groups_used : int
        Rows used, groups seen, groups with a line.
    skipped : tuple
        ((row counted from 1, reason), ...) for skipped rows (the first 10,000).
    n_skipped : int
    skipped_reasons : dict
        reason -> number of rows.
    level : float
    """

    common: CommonPower
    table: pd.DataFrame = field(repr=False)
    equal_slopes_p: float
    equal_slopes_f: float
    equal_slopes_df: tuple
    common_slope: float
    n: int
    n_groups: int
    n_groups_used: int
    skipped: tuple = field(repr=False)
    n_skipped: int
    skipped_reasons: dict = field(repr=False)
    level: float
    y_start: float
    x_start: float
    _source: object = field(repr=False, compare=False)
    _memo: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def y_power(self) -> float:
        return self.common.y_power

    @property
    def x_power(self) -> float:
        return self.common.x_power

    @property
    def left_out(self) -> pd.DataFrame:
        """The groups left out of the common power and the lines, with the reason."""
        t = self.table
        return t.loc[~t["used"], ["group", "n", "skipped", "reason"]].reset_index(drop=True)

    def row(self, group) -> pd.Series:
        """The table row of one group (its label as stored, or the same label written as text)."""
        label = self._label(group)
        return self.table.loc[self.table["group"].map(lambda v: _same_label(v, label))].iloc[0]

    def line(self, group):
        """The :class:`unbend.LineFit` of one group at the common powers (as :func:`unbend.fit` gives it)."""
        from .fitting import fit
        label = self._label(group)
        if label not in self._memo:
            row = self.row(label)
            if not row["used"]:
                raise UnbendError(f"group {label!r} has no line: {row['reason']}.")
            y, x = self._source.rows_of(label)
            self._memo[label] = fit(y, x, y_power=self.y_power, x_power=self.x_power, y_start=self.y_start,
                                    x_start=self.x_start, level=self.level)
        return self._memo[label]

    def predict(self, new_x, group=None, level: float = 0.95) -> pd.DataFrame:
        """Predictions in original units within one group, with the columns of :meth:`unbend.LineFit.predict`.

        The group's own line and residuals at the common powers give the
        median, the smeared mean and the intervals.
        """
        if group is None:
            if self.n_groups_used != 1:
                raise UnbendError("say which group to predict for (group=...); there are "
                                  f"{self.n_groups_used} groups with a line.")
            group = self.table.loc[self.table["used"], "group"].iloc[0]
        return self.line(group).predict(new_x, level=level)

    def worst(self, k: int = 10) -> pd.DataFrame:
        """The groups with lines, those whose residual checks fail first, by their smallest check p-value."""
        t = self.table[self.table["used"]].copy()
        p = t[["curvature_p", "pattern_p", "spread_p"]]
        alpha = np.array([ALPHA, PATTERN_ALPHA, ALPHA])
        t["_fails"] = (p.to_numpy(float) < alpha).sum(axis=1)
        t["_min"] = (p.to_numpy(float) / alpha).min(axis=1, initial=np.inf, where=~np.isnan(p.to_numpy(float)))
        t = t.sort_values(["_fails", "_min"], ascending=[False, True], kind="mergesort")  # ties: label order
        return t.drop(columns=["_fails", "_min"]).head(int(k)).reset_index(drop=True)

    def _label(self, group):
        labels = self.table["group"].tolist()
        for v in labels:
            if _same_label(v, group):
                return v
        text = [v for v in labels if str(v).strip() == str(group).strip()]
        if len(text) == 1:
            return text[0]
        shown = ", ".join(repr(v) for v in labels[:5]) + (" ..." if len(labels) > 5 else "")
        raise UnbendError(f"there is no group {group!r}; the groups are {shown}.")

    def explain(self, noun: str = "group") -> str:
        """A few plain sentences: the powers every group uses, whether the slopes differ, which groups stand
        out or were left out, and cautions. ``noun`` names a group in the sentences (such as "series",
        "station" or "machine"; its plural adds an s unless it ends in s)."""
        many = noun if noun.endswith("s") else noun + "s"

        def count(k, verb):  # "1 station wants", "2 stations want", "1 series wants", "2 series want"
            return f"{k} {noun if k == 1 else many} {verb + 's' if k == 1 else verb}"

        def how(power, pinned):
            return f"power {power:g} ({rung_label(power)}, {'as given' if pinned else f'chosen from all {many} together'})"

        parts = [f"The line of every {noun} uses y at {how(self.y_power, self.common.y_pinned)} and x at "
                 f"{how(self.x_power, self.common.x_pinned)}."]
        p = self.equal_slopes_p
        if not np.isfinite(p):
            parts.append(f"The slopes cannot be compared (fewer than 2 {many} with a line, or no residual spread).")
        elif p < 0.05:
            parts.append(f"The slopes differ between {many} (equal slopes F test {_p(p)}): compare {many} by their "
                         "own slopes, not by one shared slope.")
        else:
            parts.append(f"No clear difference between the slopes of the {many} (equal slopes F test {_p(p)}).")
        t = self.table
        chance = (1.0 - self.level) * self.n_groups_used
        for what in ("y", "x"):
            k = int(t[f"own_{what}_differs"].sum())
            if k:
                parts.append(f"{count(k, 'want')} another {what} power (their own interval leaves out the common one; about "
                             f"{chance:.1f} would by chance at the {self.level * 100:g}% level).")
        bad = int(sum(1 for _ in self._failing()))
        if bad:
            parts.append(f"{count(bad, 'fail')} a residual check "
                         "(curvature, pattern or spread); see each verdict.")
        left = self.n_groups - self.n_groups_used
        if left:
            parts.append(f"{left} {noun if left == 1 else many} left out (too few rows, or x or y that does not "
                         "vary).")
        parts.append(f"Check the residuals of each {noun}; predictions outside the x range of their {noun} are "
                     "extrapolation.")
        return " ".join(parts)

    def _failing(self):
        t = self.table[self.table["used"]]
        p = t[["curvature_p", "pattern_p", "spread_p"]].to_numpy(float)
        with np.errstate(invalid="ignore"):
            fails = (p < np.array([ALPHA, PATTERN_ALPHA, ALPHA])).any(axis=1)
        return t["group"][fails]

    def rows(self) -> list[tuple[str, object]]:
        """Labelled rows (label, value) summarising the fit, for a two-column table."""
        out = self.common.rows()
        a, b = self.equal_slopes_df
        out += [("groups", self.n_groups), ("groups with a line", self.n_groups_used),
                ("groups left out", self.n_groups - self.n_groups_used),
                ("rows used", self.n), ("rows skipped", self.n_skipped),
                ("equal slopes: F", self.equal_slopes_f), ("equal slopes: degrees of freedom", f"{a}, {b}"),
                ("equal slopes: p", self.equal_slopes_p), ("one slope for all groups", self.common_slope)]
        if self.n_skipped:
            out.append(("rows skipped, by reason", "; ".join(f"{k}: {v}" for k, v in self.skipped_reasons.items())))
        from .fitting import CAUTION
        out.append(("caution", CAUTION))
        return out

    def summary(self) -> str:
        """A plain-text summary: the common powers, the slope test, then the groups."""
        rows = self.rows()
        width = max(len(k) for k, _ in rows)
        lines = [f"{k:<{width}}  {v:.6g}" if isinstance(v, float) else f"{k:<{width}}  {v}" for k, v in rows]
        cols = ["group", "n", "slope", "slope_low", "slope_high", "r2", "curvature_p", "spread_p", "own_y_power"]
        with pd.option_context("display.width", 200, "display.max_rows", 60):
            lines += ["", self.table[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}")]
        return "\n".join(lines)


def _p(pv: float) -> str:
    return "p < 0.001" if pv < 0.001 else f"p = {pv:.3f}"


# ----------------------------------------------------------------------------- labels and rows

def _label_key(v):
    """Sort key for group labels of any mix of types: numbers, then booleans, then text, then the rest."""
    t = type(v)
    if t is str:
        return (2, 0.0, v)
    if isinstance(v, (bool, np.bool_)):
        return (1, int(v), "")
    if isinstance(v, numbers.Real):
        try:
            return (0, float(v), "")
        except OverflowError:  # an integer beyond the float range
            return (0, float(np.sign(v)) * np.inf, str(v))
    if isinstance(v, str):
        return (2, 0.0, str(v))
    return (3, 0.0, f"{type(v).__name__}:{v}")


def _same_label(a, b) -> bool:
    if isinstance(a, (bool, np.bool_)) != isinstance(b, (bool, np.bool_)):
        return False
    try:
        return bool(a == b)
    except (TypeError, ValueError):
        return False


def _clean_label(v):
    """A group label as kept (text stripped); None for a missing one (blank, NaN, None)."""
    if isinstance(v, np.generic):
        v = v.item()
    if v is None:
        return None
    if isinstance(v, str):
        v = v.strip()
        return v or None
    if isinstance(v, float) and not np.isfinite(v):
        return None
    try:
        if pd.isna(v):
            return None
    except (TypeError, ValueError):
        pass
    return v


def group_codes(groups, n: int):
    """(code per row, -1 where the label is missing; labels in sorted order)."""
    if hasattr(groups, "to_numpy") and not isinstance(groups, np.ndarray):
        groups = groups.to_numpy()
    if np.isscalar(groups):
        groups = [groups]
    g = np.asarray(groups) if isinstance(groups, np.ndarray) else np.array(groups, dtype=object)
    if g.ndim == 2 and 1 in g.shape:
        g = g.reshape(-1)
    if g.ndim != 1:
        raise UnbendError(f"groups must be one column of labels; got a block of shape {g.shape}.")
    if g.size != n:
        raise UnbendError(f"y has {n} rows but groups has {g.size}; give ranges of the same length.")
    if g.dtype == object or g.dtype.kind == "b":
        # a TRUE label is not the number 1 (Python and pandas would treat them as one key): text instead
        isbool = np.fromiter((type(v) is bool or type(v) is np.bool_ for v in g.tolist()), bool, g.size) \
            if g.dtype == object else np.ones(g.size, bool)
        if isbool.any():
            g = g.astype(object)
            g[isbool] = np.where(g[isbool].astype(bool), "TRUE", "FALSE")
    codes, uniques = pd.factorize(g, use_na_sentinel=True)
    kept = [_clean_label(u) for u in np.asarray(uniques, dtype=object)]
    merged: dict = {}
    for v in kept:
        if v is not None:
            merged.setdefault((type(v) is bool, v), v)
    labels = sorted(merged.values(), key=_label_key)
    rank = {(type(v) is bool, v): i for i, v in enumerate(labels)}
    remap = np.array([-1 if v is None else rank[(type(v) is bool, v)] for v in kept] + [-1], dtype=np.int64)
    codes = remap[np.where(codes < 0, len(kept), codes)]
    return codes, np.array(labels, dtype=object)


@dataclass
class BlockRows:
    """The rows of some groups read and sorted: every group seen, the block of those with usable rows."""

    labels: np.ndarray        # every group seen, sorted
    n_used: np.ndarray        # usable rows per group (may be 0)
    n_skipped: np.ndarray     # skipped rows per group (y or x not a number)
    block: B.Block            # groups with at least one usable row
    skipped: tuple            # ((row, reason), ...), the first ones
    reasons: dict             # reason -> count


def _verdicts(block, out, ty, tx) -> list:
    """Each group's verdict, word for word what :func:`unbend.fit` says on the group's rows.

    The advice for a bend follows the slope's sign and the profile likelihoods of the group's own rows
    (read only for groups whose residuals curve or fan, as ``fit`` does).
    """
    from .power import likelihood_direction
    from .wording import Bend
    from scipy import special
    res = []
    slopes, ses = np.asarray(out["slope"], float), np.asarray(out["se_slope"], float)
    ns = np.asarray(out["n"], float)
    with np.errstate(all="ignore"):  # the slope's two-sided t p-value, all groups at once (as fit's pvalues)
        trend = np.where(ns > 2, 2 * special.stdtr(ns - 2, -np.abs(slopes / ses)), np.nan)
    with np.errstate(all="ignore"):
        y_low = (np.minimum.reduceat(block.y, block.starts) + ty.start).tolist() if block.G else []
        x_low = (np.minimum.reduceat(block.x, block.starts) + tx.start).tolist() if block.G else []
        signs = np.where(np.isfinite(slopes), np.sign(slopes), 0.0).tolist()
    trend = trend.tolist()
    for i, (r2, curv, pat, spr, nor, n) in enumerate(B.checks(out)):
        bend = Bend(y_power=ty.power, x_power=tx.power, slope_sign=signs[i], trend_p=trend[i], n_x=1, y_name="y",
                    x_name="x", y_family=ty.family, y_low=y_low[i], x_low=x_low[i])
        if (curv.ran and not curv.passed) or (spr.ran and not spr.passed):
            a, b = int(block.starts[i]), int(block.starts[i] + block.counts[i])
            yg, xg = block.y[a:b], block.x[a:b]
            X1 = xg[:, None]
            bend = replace(bend, y_lik=likelihood_direction(yg, X1, ty, tx, "y"),
                           x_lik=likelihood_direction(yg, X1, ty, tx, "x"))
        res.append(verdict(r2, curv, spr, nor, n, pat, bend=bend))
    return res


def read_rows(y, x, groups) -> BlockRows:
    """Read y, x and group labels: a row counts when y and x are numbers and the label is present."""
    yv = as_vector(y, "y")
    X = as_matrix(x, "x")
    if X.shape[1] != 1:
        raise UnbendError(f"x has {X.shape[1]} columns; fit_groups takes one x column (a line per group).")
    xv = X[:, 0]
    if xv.size != yv.size:
        raise UnbendError(f"y has {yv.size} rows but x has {xv.size}; give ranges of the same length.")
    codes, labels = group_codes(groups, yv.size)
    ok_y, ok_x, ok_g = np.isfinite(yv), np.isfinite(xv), codes >= 0
    ok = ok_y & ok_x & ok_g
    G = labels.size
    n_used = np.bincount(codes[ok], minlength=G)
    n_skipped = np.bincount(codes[ok_g & ~ok], minlength=G)
    bad = np.flatnonzero(~ok)
    words = np.array(["group is missing", "y and x are not numbers", "y is not a number", "x is not a number"])
    kind = np.select([~ok_g[bad], ~ok_y[bad] & ~ok_x[bad], ~ok_y[bad]], [0, 1, 2], 3)
    reasons = {str(words[k]): int(v) for k, v in zip(*np.unique(kind, return_counts=True))}
    skipped = tuple((int(i) + 1, str(words[k])) for i, k in zip(bad[:_SKIP_LIMIT], kind[:_SKIP_LIMIT]))
    c, xo = codes[ok], xv[ok]
    # rows sorted by group, and by x within each group (the pattern check bins rows by x)
    by_x = np.argsort(xo)
    order = by_x[np.argsort(c[by_x].astype(np.int16 if G < 2 ** 15 else np.int64), kind="stable")]
    keep = n_used > 0
    block = B.Block(labels[keep], n_used[keep], yv[ok][order], xo[order])
    return BlockRows(labels, n_used, n_skipped, block, skipped, reasons)


# ----------------------------------------------------------------------------- one machine

class LocalSource:
    """Groups in one block in memory: every group on one machine, or one partition's groups on Dask.

    The profile pieces (:meth:`y_mean_log`, :meth:`lse`), the domain check and
    the group table are what a partition contributes; :meth:`profile` combines
    them for one block. :class:`unbend.distributed.DaskSource` combines them
    across partitions with the same code.
    """

    def __init__(self, rows: BlockRows, y_start: float, x_start: float):
        self.rows = rows
        self.ys, self.xs = y_start, x_start
        ok, reasons = rows.block.usable()
        self.reasons = reasons
        self.block = rows.block.take(np.flatnonzero(ok))
        self.N = self.block.n
        self.G = self.block.G
        self.n_skipped = int(sum(rows.reasons.values()))

    # pieces a block contributes
    def domain_error(self, t: Reexpression, what: str):
        """The DomainError (or None) for re-expressing this block's ``what`` with ``t``, and its smallest value."""
        v = self.block.y if what == "y" else self.block.x
        try:
            t.check(v, what)
        except UnbendError as e:
            return e, float(v.min())
        return None, np.inf

    def y_mean_log(self, x_power):
        """(sum over the groups of rows x mean log y, rows) at x power ``x_power``."""
        if self.G == 0:
            return 0.0, 0
        t = block_terms(self.block, "y", x_power, self.ys, self.xs)
        return float(np.sum(t.counts * t.m)), t.n

    def lse(self, what, other, p, m=0.0):
        """log of this block's summed residual sum of squares at power ``p`` (see :mod:`unbend._blocks`)."""
        if self.G == 0:
            return -np.inf
        t = block_terms(self.block, what, other, self.ys, self.xs)
        return B.common_y_lse(t, p, m) if what == "y" else B.common_x_lse(t, p)

    # the whole source
    def check(self, t: Reexpression, what: str) -> None:
        err, _ = self.domain_error(t, what)
        if err is not None:
            raise err

    def lse_many(self, what, other, ps, m=0.0):
        return [self.lse(what, other, p, m) for p in ps]

    def profile(self, what: str, other_power: float):
        """``f(p) -> log-likelihood`` of the common power for ``what`` given the other power
        (``f.many(powers)`` for several at once)."""
        m = 0.0
        if what == "y":
            total, n = self.y_mean_log(other_power)
            m = total / n
        return Profile(lambda ps: [self.lse_many(what, other_power, ps, m)], what, self.N, m)

    def locator(self):
        """A source over a subset of whole groups with about 20,000 rows, or None for small data.

        The groups are taken in an order fixed by their labels alone, so the
        same groups are taken however the rows arrive (and on Dask as here)."""
        if "_locator" in self.__dict__:
            return self._locator
        take = locator_groups(self.block.labels, self.block.counts, self.N)
        self._locator = None
        if take is not None:
            self._locator = subset_source(self.block.take(take), self.ys, self.xs)
        return self._locator

    def table(self, y_power, x_power, level, own=True):
        return group_table(self.rows.labels, self.rows.n_used, self.rows.n_skipped, self.rows.block, self.reasons,
                           self.block, y_power, x_power, self.ys, self.xs, level, own)

    def release(self) -> None:
        """Drop what only the analysis needed (per-group sums, work arrays, the locator): a result keeps
        just the rows, for predictions."""
        for b in (self.__dict__.get("block"), self.rows.block):
            if b is not None:
                b.__dict__.pop("_terms", None)
        self.block = None
        self._locator = None

    def rows_of(self, label):
        """(y, x) of the usable rows of the group ``label`` (empty when this block does not hold it)."""
        b = self.rows.block
        hit = np.flatnonzero([_same_label(v, label) for v in b.labels])
        r = b.rows_of(hit[:1])
        return b.y[r], b.x[r]


class Profile:
    """The common profile log-likelihood at one power (``f(p)``) or several (``f.many(ps)``), from the
    blocks' log residual sums of squares: ``lse_parts(ps)`` gives one list per block."""

    def __init__(self, lse_parts, what, N, m):
        self.lse_parts, self.what, self.N, self.m = lse_parts, what, N, m

    def many(self, ps):
        parts = self.lse_parts(list(ps))
        return [profile_ll(self.what, [blk[k] for blk in parts], self.N, self.m) for k in range(len(ps))]

    def __call__(self, p):
        return self.many([float(p)])[0]


def subset_source(block, ys, xs):
    """A source over a block of usable groups (a locator): profiles only."""
    sub = LocalSource.__new__(LocalSource)
    sub.block = block
    sub.ys, sub.xs, sub.N, sub.G, sub.n_skipped, sub._locator = ys, xs, block.n, block.G, 0, None
    return sub


def profile_ll(what, lses, N, m):
    """The common profile log-likelihood from the blocks' log residual sums of squares (combined in the
    order given): Box-Cox for y (in the units of y, Jacobian included), or over the x power."""
    lse = float(np.logaddexp.reduce(np.asarray(lses, dtype=float))) if len(lses) > 1 else float(lses[0])
    ll = float(B.gaussian_ll(lse, N))
    return ll - N * m if what == "y" else ll


def locator_groups(labels, counts, N):
    """Positions (sorted) of the groups a locator uses, or None when the data are small enough to use all."""
    if N <= LOCATE_ABOVE or len(labels) < 2:
        return None
    keys = [_label_key(v) for v in labels]
    order = np.array(sorted(range(len(labels)), key=lambda i: (zlib.crc32(repr(keys[i]).encode()), keys[i])),
                     dtype=np.intp)
    take = order[:int(np.searchsorted(np.cumsum(counts[order]), LOCATE_ROWS)) + 1]
    if counts[take].sum() > N / 2:
        return None
    return np.sort(take)


def block_terms(block, what, other, ys, xs):
    """The per-group sums behind the profile of ``what`` ('y' or 'x') with the other at power ``other``
    (kept on the block, so the own-power profiles reuse them)."""
    memo = block.__dict__.setdefault("_terms", {})
    key = (what, float(other), ys, xs)
    if key in memo:
        memo[key] = memo.pop(key)  # most recently used last
        return memo[key]
    with np.errstate(all="ignore"):
        if what == "y":
            t = B.YTerms(block.counts, np.log(block.y + ys), Reexpression(other, xs).apply(block.x))
        else:
            t = B.XTerms(block.counts, Reexpression(other, ys).apply(block.y), np.log(block.x + xs))
    while len(memo) >= _KEEP_TERMS:  # each holds four arrays the size of the data
        memo.pop(next(iter(memo)))
    memo[key] = t
    return t


# ----------------------------------------------------------------------------- the common power

def _search(f, level, locator_f=None, n_ratio=1.0, centre=1.0):
    """Maximum and interval of one profile log-likelihood ``f`` (a seeded subset may say where to look)."""
    def values(p, sel):
        return np.array([f(float(p[0]))])

    step = 0.5
    if locator_f is not None:
        r = B.profile_maxima(lambda p, sel: np.array([locator_f(float(p[0]))]), 1, level, centre, 0.5, SEARCH_LIMIT)
        if r["ok"][0] and np.isfinite(r["low"][0]) and np.isfinite(r["high"][0]) and not r["edge"][0]:
            z = np.sqrt(stats.chi2.ppf(level, 1))
            centre = float(r["est"][0])
            step = max((r["high"][0] - r["low"][0]) / (2 * z) * np.sqrt(n_ratio), 1e-3)
    r = B.profile_maxima(values, 1, level, centre, step, SEARCH_LIMIT)
    if step < 0.5 and _exhausted(r, centre, step):
        r = B.profile_maxima(values, 1, level, centre, 0.5, SEARCH_LIMIT)
    if not r["ok"][0]:
        raise UnbendError("the likelihood could not be evaluated at any power; check the data for extreme values.")
    return float(r["est"][0]), float(r["low"][0]), float(r["high"][0]), float(r["top"][0])


def _exhausted(r, centre, step):
    """True when a narrow grid ran out before the search limit (so its answer is not to be trusted)."""
    reach = step * B._K.max()
    lo_short = centre - reach > -SEARCH_LIMIT
    hi_short = centre + reach < SEARCH_LIMIT
    return bool(r["edge"][0] or (np.isinf(r["low"][0]) and lo_short) or (np.isinf(r["high"][0]) and hi_short)
                or not r["ok"][0])


def suggest_common(src, what, other, level, rungs=LADDER, extra="") -> PowerSuggestion:
    """The common power for ``what`` ('y' or 'x') given the other at power ``other``: the joint profile
    likelihood with a line per group, and the ladder rung by the rule of :func:`unbend.choose_rung`."""
    f = src.profile(what, other)
    loc = src.locator()
    est, lo, hi, top = _search(f, level, None if loc is None else loc.profile(what, other),
                               (loc.N / src.N) if loc is not None else 1.0, centre=1.0)
    groups = f"{src.G} group{'s' if src.G != 1 else ''}"
    if what == "y":
        method = f"Box-Cox profile likelihood with a line per group ({groups}), x at power {other:g}"
    else:
        method = f"profile likelihood over the x power with a line per group ({groups}), y at power {other:g}"
    return _suggestion(est, lo, hi, level=level, what=what, method=method, n=src.N, skipped=src.n_skipped,
                       loglik=top, rungs=rungs, extra=extra)


def choose_common(src, y_power, x_power, level) -> CommonPower:
    """The pair of powers for every group: pinned powers as given; otherwise the rung each joint
    profile likelihood suggests, alternating y given x and x given y until neither changes."""
    for what, given in (("y", y_power), ("x", x_power)):
        if given is None:  # the profile over this power needs values above 0 (after the start)
            try:
                src.check(Reexpression(0.0, src.ys if what == "y" else src.xs), what)
            except DomainError as e:  # said as what it is: the power cannot be chosen, not "log" refused
                head = str(e).split(" Add a start")[0].replace("log needs", f"choosing the common power for {what} "
                                                               "needs", 1)
                raise DomainError(f"{head} Add a start of {e.proposed_start:g} ({what}_start={e.proposed_start:g}), "
                                  f"or give {what}_power.", e.proposed_start) from None
    sy = sx = None
    note = ""
    if y_power is not None and x_power is not None:
        yp, xp = y_power, x_power
        note = "both powers given"
    elif y_power is not None:
        yp = y_power
        sx = suggest_common(src, "x", yp, level)
        xp = sx.rung
        note = "y power given; x power from the joint profile likelihood given y at that power"
    elif x_power is not None:
        xp = x_power
        sy = suggest_common(src, "y", xp, level)
        yp = sy.rung
        note = "x power given; y power from the joint profile likelihood given x at that power"
    else:
        seed = src.locator() or src
        ry0, rx0 = seed_pair(seed)
        xp, path, settled = rx0, [], False
        for k in range(_ROUNDS):
            sy = suggest_common(src, "y", xp, level)
            sx = suggest_common(src, "x", sy.rung, level)
            path.append((xp, sy.rung, sx.rung))
            if sx.rung == xp:
                settled = True
                break
            if k < _ROUNDS - 1:
                xp = sx.rung
        yp = sy.rung
        where = "" if seed is src else f" (on a seeded subset of {seed.G} whole groups)"
        steps = "; ".join(f"given x {a:g}, y {b:g}; given y {b:g}, x {c:g}" for a, b, c in path)
        start = f"the pair of ladder rungs with the highest joint likelihood{where} was y {ry0:g}, x {rx0:g}"
        note = (f"{start}; then y was chosen given x and x given y, in turn, until neither rung changed ({steps})"
                if settled else f"{start}; y and x chosen given each other in turn did not settle in {_ROUNDS} "
                f"rounds ({steps}); the last y and the x it was chosen with are used")
    return CommonPower(y_power=float(yp), x_power=float(xp), y=sy, x=sx, y_pinned=y_power is not None,
                       x_pinned=x_power is not None, note=note)


def seed_pair(src, rungs=LADDER):
    """The pair of rungs (y, x) with the highest joint log-likelihood in the units of y (a line per group,
    Jacobian included), over every pair of ``rungs``."""
    best = (-np.inf, 1.0, 1.0)
    for rx in rungs:
        for ry, ll in zip(rungs, src.profile("y", rx).many(rungs)):
            if ll > best[0]:
                best = (ll, ry, rx)
    return best[1], best[2]


# ----------------------------------------------------------------------------- the group table

def group_table(labels, n_used, n_skipped, seen_block, reasons, block, y_power, x_power, ys, xs, level, own=True):
    """One row per group seen (:data:`TABLE_COLUMNS`), and the sums the slope test needs, from one block."""
    G = labels.size
    t = pd.DataFrame({"group": pd.Series(labels, dtype=object), "n": n_used.astype(np.int64),
                      "skipped": n_skipped.astype(np.int64)})
    why = np.full(G, "no usable rows (y and x not both numbers)", dtype=object)
    pos_seen = _positions(labels, seen_block.labels)
    why[pos_seen] = reasons
    t["used"] = why == ""
    t["reason"] = why
    num = {c: np.full(G, np.nan) for c in ["intercept", "slope", "slope_low", "slope_high", "se_intercept", "se_slope",
                                            "resid_sd", "r2", "curvature_p", "pattern_p", "spread_p", "normality_p",
                                            "own_y_power", "own_y_low", "own_y_high", "own_x_power", "own_x_low",
                                            "own_x_high", "x_min", "x_max", "sxx_s", "rss_s", "slope_s",
                                            "log_ybig", "log_xbig"]}
    verdicts = np.full(G, "", dtype=object)
    pos = _positions(labels, block.labels)
    if block.G:
        ty, tx = Reexpression(y_power, ys), Reexpression(x_power, xs)
        with np.errstate(all="ignore"):
            yt, xt = ty.apply(block.y), tx.apply(block.x)
        if not (np.all(np.isfinite(yt)) and np.all(np.isfinite(xt))):
            raise UnbendError("some values overflow at these powers (too large to re-express); choose powers nearer "
                              "1 or rescale the data.")
        with np.errstate(all="ignore"):
            out, _ = B.lines(block.counts, yt, xt, block.x, level)
        for c in num:
            if c in out:
                num[c][pos] = out[c]
        verdicts[pos] = _verdicts(block, out, ty, tx)
        for what, other in (("y", x_power), ("x", y_power)) if own else ():
            res = own_powers(block, what, other, y_power if what == "y" else x_power, ys, xs, level)
            if res is not None:
                num[f"own_{what}_power"][pos], num[f"own_{what}_low"][pos], num[f"own_{what}_high"][pos] = res
    for c in ["intercept", "slope", "slope_low", "slope_high", "se_intercept", "se_slope", "resid_sd", "r2",
              "curvature_p", "pattern_p", "spread_p", "normality_p"]:
        t[c] = num[c]
    t["verdict"] = verdicts
    t["y_power"] = float(y_power)
    for c in ("own_y_power", "own_y_low", "own_y_high"):
        t[c] = num[c]
    t["own_y_differs"] = t["used"] & ~((t["own_y_low"] <= y_power) & (y_power <= t["own_y_high"])) & \
        t["own_y_power"].notna()
    t["x_power"] = float(x_power)
    for c in ("own_x_power", "own_x_low", "own_x_high"):
        t[c] = num[c]
    t["own_x_differs"] = t["used"] & ~((t["own_x_low"] <= x_power) & (x_power <= t["own_x_high"])) & \
        t["own_x_power"].notna()
    t["x_min"], t["x_max"] = num["x_min"], num["x_max"]
    sums = pd.DataFrame({"group": t["group"], "n": t["n"], "used": t["used"],
                         **{c: num[c] for c in ("slope_s", "sxx_s", "rss_s", "log_ybig", "log_xbig")}})
    return t[TABLE_COLUMNS], sums


def _positions(all_labels, some_labels):
    """Where each of ``some_labels`` sits in ``all_labels`` (both sorted by :func:`_label_key`)."""
    if len(some_labels) == len(all_labels):
        return np.arange(len(all_labels))
    where = {(type(v) is bool, v): i for i, v in enumerate(all_labels)}
    return np.array([where[(type(v) is bool, v)] for v in some_labels], dtype=np.intp)


def own_powers(block, what, other, centre, ys, xs, level):
    """Each group's own power for ``what`` given the other at the common power: (estimate, low, high)."""
    lowest = block.y + ys if what == "y" else block.x + xs
    if not np.all(lowest > 0):
        return None
    terms = block_terms(block, what, other, ys, xs)
    counts = terms.counts.astype(float)

    def values(p, sel):
        c = counts if sel is None else counts[sel]
        ll = B.gaussian_ll(terms.lrss(p, sel), c)
        if what == "y":
            ll = ll - c * (terms.m if sel is None else terms.m[sel])
        return ll

    r = B.profile_maxima(values, block.G, level, centre, 0.5, SEARCH_LIMIT, tol=OWN_TOL, xtol=OWN_XTOL)
    return r["est"], r["low"], r["high"]


def equal_slopes(sums: pd.DataFrame):
    """F test of one common slope against one slope per group, each group with its own intercept.

    Returns (F, p, (df1, df2), common slope). The extra sum of squares of the
    smaller model is ``sum_g Sxx_g (b_g - b)^2`` with ``b`` the pooled slope.
    Each block's sums arrive divided by its largest y and x (``log_ybig``,
    ``log_xbig``) and are brought to one scale here, so nothing overflows.
    """
    s = sums[sums["used"]]
    G = len(s)
    N = int(s["n"].sum())
    df1, df2 = G - 1, N - 2 * G
    if G == 0:
        return np.nan, np.nan, (0, 0), np.nan
    ly, lx = s["log_ybig"].to_numpy(float), s["log_xbig"].to_numpy(float)
    LY, LX = float(ly.max()), float(lx.max())
    with np.errstate(all="ignore"):
        sxx = s["sxx_s"].to_numpy(float) * np.exp(2.0 * (lx - LX))
        rss = float(np.sum(s["rss_s"].to_numpy(float) * np.exp(2.0 * (ly - LY))))
        b = s["slope_s"].to_numpy(float) * np.exp((ly - LY) - (lx - LX))
        w = sxx / np.max(sxx)
        pooled_s = float(np.sum(w * b) / np.sum(w))
        extra = float(np.sum(sxx * (b - pooled_s) ** 2))
        pooled = pooled_s * float(np.exp(LY - LX))
        if G < 2 or df2 < 1 or not rss > 0 or not np.isfinite(extra):
            return np.nan, np.nan, (df1, df2), pooled
        F = (extra / df1) / (rss / df2)
        p = float(stats.f.sf(F, df1, df2))
    return float(F), p, (df1, df2), pooled


# ----------------------------------------------------------------------------- entry point

def fit_groups(y, x, groups, *, y_power=None, x_power=None, y_start=0.0, x_start=0.0, level=0.95,
               own_powers=True) -> GroupFit:
    """One re-expression for every group, a line per group, and a test of whether the slopes differ.

    Parameters
    ----------
    y, x : array_like
        One column each; a row counts when y and x are numbers and its group
        label is present. Skipped rows are counted, with their reasons.
    groups : array_like
        One label per row (text, numbers or a mix): a site, machine, batch ...
    y_power, x_power : float, optional
        Pin a power (0 = log); left out, it is chosen for all groups together.
    y_start, x_start : float
        Added before re-expressing.
    level : float
        Level of every interval.
    own_powers : bool
        Each group's own power for y and for x, with its interval (the
        ``own_*`` columns). About half the work at scale; False leaves those
        columns blank.

    Returns
    -------
    GroupFit

    Notes
    -----
    The common power for y maximises the Box–Cox profile likelihood of the
    model with its own intercept and slope in every group and one residual
    variance, Jacobian included (Box and Cox 1964): with ``y**(lambda)`` the
    Box–Cox re-expression and RSS the residual sum of squares summed over the
    groups, ``-N/2 log(RSS(lambda)/N) + (lambda - 1) sum(log y)``. The x power
    maximises the profile likelihood of the same model over a power of x
    shared by the groups (the estimate Box and Tidwell's iteration
    approaches). Each interval holds the powers whose likelihood ratio to the
    maximum is below the chi-square(1) quantile, and the rung is chosen as
    :func:`unbend.choose_rung` does. With neither power given, y is chosen
    given x raw, then x given that y rung, in turn until neither rung
    changes. Groups with fewer than 3 usable rows, or whose x or y does not
    vary, are listed with the reason and left out of everything else.

    Every group's line is the least-squares line of :func:`unbend.fit` on that
    group's rows at the common powers, with the same residual checks and
    verdict; its own power for y (given x at the common power) and for x
    (given y at the common power) come from the same profile likelihoods on
    its rows alone. The slopes are compared by the F test of the model with
    one slope for all groups (each keeping its own intercept) against one
    slope per group, on the common scale.

    Everything per group is computed from segment sums over the rows sorted
    by group, for all groups at once.

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations.
    *Journal of the Royal Statistical Society B* 26(2), 211-252.
    Box, G. E. P. and Tidwell, P. W. (1962). Transformation of the independent
    variables. *Technometrics* 4(4), 531-550.
    Weisberg, S. (2014). *Applied Linear Regression*, 4th ed., Wiley, ch. 5
    (comparing regression lines across groups).

    Examples
    --------
    >>> import numpy as np, unbend
    >>> rng = np.random.default_rng(7)
    >>> g = np.repeat(["north", "south", "east"], 40)
    >>> x = rng.uniform(1, 50, g.size)
    >>> y = np.exp(0.5 + 0.04 * x + rng.normal(0, 0.1, g.size))
    >>> gf = unbend.fit_groups(y, x, g, x_power=1)
    >>> gf.common.y.label
    'log'
    >>> list(gf.table["group"])
    ['east', 'north', 'south']
    """
    level = check_level(level)
    ys = check_number(y_start, "y_start")
    xs = check_number(x_start, "x_start")
    yp = None if y_power is None else check_power(y_power, "y_power")
    xp = None if x_power is None else check_power(x_power, "x_power")
    rows = read_rows(y, x, groups)
    src = LocalSource(rows, ys, xs)
    return analyse(src, yp, xp, ys, xs, level, own=bool(own_powers), skipped=rows.skipped, reasons=rows.reasons)


def analyse(src, yp, xp, ys, xs, level, *, own, skipped, reasons) -> GroupFit:
    """The common powers, the group table and the slope test from a source of groups (one machine or many)."""
    if src.G == 0:
        raise UnbendError(f"no group has {B.MIN_GROUP_ROWS} or more usable rows with x and y that vary; "
                          "check the group, y and x columns.")
    with np.errstate(all="ignore"):
        common = choose_common(src, yp, xp, level)
    src.check(Reexpression(common.y_power, ys), "y")
    src.check(Reexpression(common.x_power, xs), "x")
    table, sums = src.table(common.y_power, common.x_power, level, own)
    F, p, dfs, pooled = equal_slopes(sums)
    used = table["used"].to_numpy(bool)
    src.release()
    return GroupFit(common=common, table=table, equal_slopes_p=p, equal_slopes_f=F, equal_slopes_df=dfs,
                    common_slope=pooled, n=int(table.loc[used, "n"].sum()), n_groups=len(table),
                    n_groups_used=int(used.sum()), skipped=tuple(skipped), n_skipped=int(sum(reasons.values())),
                    skipped_reasons=dict(reasons), level=level, y_start=ys, x_start=xs, _source=src)

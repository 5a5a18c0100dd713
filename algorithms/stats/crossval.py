"""Cross-validation of surface models: grouped folds, spatial blocks, scores, model choice, GCV.

Picks along one contact are strongly correlated: a neighbour on the same line predicts a
held-out pick almost perfectly, whatever the model. So folds are made of whole groups (contact
segments), never single picks (:func:`make_folds`); without groups, square spatial blocks play
that part (:func:`spatial_block_groups`). :func:`cross_validate` runs a ``fit_predict`` callable
over the folds and returns a :class:`CVScore`; :func:`select_model` picks a model from the
scores; :func:`gcv_from_spectrum` is the generalized cross-validation function of a smoothing
spline from the eigen-decomposition of its reduced kernel matrix.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np
from scipy.spatial import Delaunay, QhullError, cKDTree
from scipy.special import chdtri

from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.stats.robust import robust_lstsq

__all__ = [
    "CVScore",
    "make_folds",
    "spatial_block_groups",
    "segment_groups",
    "cross_validate",
    "select_model",
    "choose_model",
    "ModelChoice",
    "typical_gap_m",
    "residual_correlation_m",
    "trimmed_mean_square",
    "holdout_block_m",
    "ErrorGrowth",
    "fit_error_growth",
    "gcv_from_spectrum",
    "SELECTION_RULES",
]

#: Valid ``rule`` values of :func:`select_model` / :func:`choose_model`.
SELECTION_RULES = ("data_error", "one_se", "min")
#: Significance level of the chi-square test of a model against the stated pick error. Small,
#: because residuals of neighbouring segments are not quite independent, so the test is
#: approximate: it is meant to catch residuals many times the stated error, not a marginal excess.
CHI2_ALPHA = 0.001
#: Smallest hold-out block, in grid cells.
MIN_BLOCK_CELLS = 3


@dataclass(frozen=True)
class CVScore:
    """Cross-validation score of one model.

    Attributes
    ----------
    rmse_m : float
        Root-mean-square error of all held-out predictions pooled (metres); ``nan`` when the
        model could not be fitted on some fold.
    fold_rmse_m : ndarray, shape ``(k,)``
        RMSE of each fold.
    se_m : float
        Standard error of the mean fold RMSE, ``std(fold_rmse_m, ddof=1) / sqrt(k)``.
    n_held_out : int
        Number of held-out predictions (every pick once).
    distance_m : float
        Median distance from a held-out pick to the nearest datum used to predict it: the
        distance at which ``rmse_m`` was measured.
    errors_m : ndarray, shape ``(n,)``
        Prediction minus observation for every pick, in input order (``nan`` if unscored).
    reason : str or None
        Why the score is ``nan`` (the error message of the failed fit).
    distances_m : ndarray, shape ``(n,)``, optional
        Distance from every pick to the nearest datum that predicted it.
    n_groups : int
        Number of distinct groups held out (0 when unknown).
    """

    rmse_m: float
    fold_rmse_m: np.ndarray
    se_m: float
    n_held_out: int
    distance_m: float
    errors_m: np.ndarray
    reason: str | None = None
    distances_m: np.ndarray | None = field(default=None, repr=False)
    n_groups: int = 0


def make_folds(groups, *, n_folds: int = 5, seed: int = 0) -> np.ndarray:
    """Assign whole groups to ``k`` folds of nearly equal numbers of picks.

    Parameters
    ----------
    groups : array_like, shape ``(n,)``
        A label per pick (contact segment id, block id ...). At least two distinct labels.
    n_folds : int, default 5
        Wanted number of folds; fewer when there are fewer labels (``k = min(n_folds,
        number of labels)``).
    seed : int, default 0
        Seed of ``numpy.random.default_rng`` that breaks ties between groups of equal size.

    Returns
    -------
    ndarray of int, shape ``(n,)``
        Fold index ``0 .. k-1`` of every pick. All picks of a group share one fold.

    Raises
    ------
    InputError
        Fewer than two distinct labels or ``n_folds < 2``.

    Notes
    -----
    Greedy balancing: groups in a seeded random order, then stably sorted by decreasing size,
    each go to the fold holding the fewest picks so far (ties: the lowest fold index).

    Examples
    --------
    >>> make_folds([1, 1, 1, 2, 2, 3], n_folds=2).tolist()
    [0, 0, 0, 1, 1, 1]
    """
    g = np.asarray(groups).reshape(-1)
    if int(n_folds) < 2:
        raise InputError(f"n_folds must be at least 2, got {n_folds}")
    labels, inverse, counts = np.unique(g, return_inverse=True, return_counts=True)
    if len(labels) < 2:
        raise InputError(f"cross-validation needs at least two groups of picks, got "
                         f"{len(labels)}; pass contact segment ids as groups or leave groups "
                         "unset to use spatial blocks")
    k = min(int(n_folds), len(labels))
    rng = np.random.default_rng(seed)
    order = rng.permutation(len(labels))
    order = order[np.argsort(-counts[order], kind="stable")]
    load = np.zeros(k, dtype=np.int64)
    fold_of_label = np.empty(len(labels), dtype=np.int64)
    for lab in order:
        f = int(np.argmin(load))
        fold_of_label[lab] = f
        load[f] += counts[lab]
    return fold_of_label[inverse]


def spatial_block_groups(x, y, *, n_blocks: int) -> np.ndarray:
    """Labels of square spatial blocks, for cross-validation when no groups are known.

    Parameters
    ----------
    x, y : array_like, shape ``(n,)``
        Map coordinates, metres.
    n_blocks : int
        Approximate number of blocks over the bounding box: the block side is
        ``sqrt(width * height / n_blocks)`` (the longer side when the box is a line).

    Returns
    -------
    ndarray of int, shape ``(n,)``
        Block label of every point (labels are compact, ``0 .. b-1``).

    References
    ----------
    Roberts, D. R., Bahn, V., Ciuti, S., Boyce, M. S., Elith, J., Guillera-Arroita, G.,
    Hauenstein, S., Lahoz-Monfort, J. J., Schröder, B., Thuiller, W., Warton, D. I., Wintle,
    B. A., Hartig, F. & Dormann, C. F. (2017). Cross-validation strategies for data with
    temporal, spatial, hierarchical, or phylogenetic structure. *Ecography*, 40(8), 913–929.
    https://doi.org/10.1111/ecog.02881
    """
    x = np.asarray(x, dtype=float).reshape(-1)
    y = np.asarray(y, dtype=float).reshape(-1)
    if int(n_blocks) < 1:
        raise InputError(f"n_blocks must be at least 1, got {n_blocks}")
    w, h = float(np.ptp(x)) if len(x) else 0.0, float(np.ptp(y)) if len(y) else 0.0
    side = np.sqrt(w * h / n_blocks) if w * h > 0 else max(w, h) / n_blocks
    if not side > 0:
        return np.zeros(len(x), dtype=np.int64)
    i = np.floor((x - x.min()) / side).astype(np.int64)
    j = np.floor((y - y.min()) / side).astype(np.int64)
    _, lab = np.unique(i * (int(j.max()) + 1) + j, return_inverse=True)
    return lab.astype(np.int64)


def segment_groups(x, y, contact_id, *, block_m: float) -> np.ndarray:
    """Split contacts into segments for grouped cross-validation.

    A segment is the part of one contact inside one square block of side ``block_m``; the
    label is unique per ``(contact_id, block)``. Use it when a sheet has few long contacts, so
    that folds hold out stretches of contact rather than whole contacts.

    Parameters
    ----------
    x, y : array_like, shape ``(n,)``
        Pick coordinates, metres.
    contact_id : array_like, shape ``(n,)``
        Contact (feature) id of every pick.
    block_m : float
        Block side, metres.

    Returns
    -------
    ndarray of int, shape ``(n,)``
    """
    x = np.asarray(x, dtype=float).reshape(-1)
    y = np.asarray(y, dtype=float).reshape(-1)
    cid = np.asarray(contact_id).reshape(-1)
    if not (len(x) == len(y) == len(cid)):
        raise InputError(f"x, y and contact_id differ in length ({len(x)}, {len(y)}, "
                         f"{len(cid)}); give one of each per pick")
    if not float(block_m) > 0:
        raise InputError(f"block_m must be a positive length in metres, got {block_m}")
    if len(x) == 0:
        return np.zeros(0, dtype=np.int64)
    i = np.floor((x - x.min()) / block_m).astype(np.int64)
    j = np.floor((y - y.min()) / block_m).astype(np.int64)
    _, c = np.unique(cid, return_inverse=True)
    key = (c * (int(i.max()) + 1) + i) * (int(j.max()) + 1) + j
    _, lab = np.unique(key, return_inverse=True)
    return lab.astype(np.int64)


def typical_gap_m(xy, *, n_samples: int = 10_000) -> float:
    """Typical distance from the mapped ground to the nearest pick.

    The median, over a square lattice of about ``n_samples`` points inside the convex hull of
    the picks, of the distance to the nearest pick: how far a map cell between the contacts
    usually lies from data. Cross-validation that holds out blocks of about this size asks
    each model the same question the map asks of it (Roberts et al. 2017, who size blocks
    from the range of spatial dependence for the same reason).

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Pick positions, metres.
    n_samples : int, default 10000

    Returns
    -------
    float
        Metres. When the picks span no area (a single line) the median nearest-neighbour
        spacing of the picks; 0 for fewer than two distinct picks.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(0, 1000, 201)
    >>> two_lines = np.r_[np.c_[x, np.zeros(201)], np.c_[x, np.full(201, 400.0)]]
    >>> 90 < typical_gap_m(two_lines) < 110   # cells lie 0-200 m from a line: median 100 m
    True
    """
    p = np.unique(np.asarray(xy, dtype=float).reshape(-1, 2), axis=0)
    p = p[np.all(np.isfinite(p), axis=1)]
    if len(p) < 2:
        return 0.0
    tree = cKDTree(p)
    try:
        tri = Delaunay(p)
    except QhullError:
        tri = None
    if tri is not None:
        lo, hi = p.min(axis=0), p.max(axis=0)
        side = float(np.sqrt(np.prod(hi - lo) / max(int(n_samples), 1)))
        if side > 0:
            gx = np.arange(lo[0] + side / 2, hi[0], side)
            gy = np.arange(lo[1] + side / 2, hi[1], side)
            q = np.stack(np.meshgrid(gx, gy), axis=-1).reshape(-1, 2)
            q = q[tri.find_simplex(q) >= 0]
            if len(q) >= 10:
                return float(np.median(tree.query(q)[0]))
    nn = tree.query(p, k=2)[0][:, 1]
    return float(np.median(nn))


def residual_correlation_m(xyz, contact_id=None, *, trend=None, sigma_m=None,
                           max_lag_steps: int = 400) -> float:
    """Distance along the contacts over which the residuals of a plane stay correlated.

    Digitising errors are shared by neighbouring picks along a mapped line; a hold-out block
    shorter than their correlation lets a flexible model predict a held-out pick from its
    neighbours' errors and look better than it is. This takes the residuals of ``trend`` or
    else of a plane fitted robustly (:func:`strikeline.stats.robust.robust_lstsq`, so that a
    faulted block or a mistraced stretch does not tilt it; vertical residuals), walks each
    contact in pick order (picks as taken along the line) and estimates the semivariogram of the residuals along the line robustly,
    ``γ(h) = median((r_{i+h} − r_i)²) / (2 · 0.4549)``, against the robust variance
    ``median((r − median r)²) / 0.4549`` as sill (medians, so that a mistraced stretch or a
    fault — a few large, locally shared residuals — does not stretch the estimate). It
    returns the e-folding distance: the first lag at which ``γ(h) / sill`` exceeds
    ``1 − 1/e`` (linear interpolation between lags; lags in steps of the median pick
    spacing). On a surface that is not a plane the residuals also carry the unmodelled
    shape, and the length grows with it: a conservative estimate.

    Parameters
    ----------
    xyz : array_like, shape ``(n, 3)``
        Picks in the order they were taken along their contacts.
    contact_id : array_like, shape ``(n,)``, optional
        Contact of every pick (lags never cross contacts).
    trend : array_like, shape ``(n,)``, optional
        The surface's elevation at every pick from a smooth fit (e.g. a spline smoothed to the
        stated error), whose residuals are then used instead of a plane's: on a curved surface
        they are the picks' errors, not the unmodelled shape.
    sigma_m : float, optional
        The stated pick error: residuals whose robust RMS is under a quarter of it are too
        small for their correlation to matter, and the length is 0.
    max_lag_steps : int, default 400

    Returns
    -------
    float
        Metres (0 when it cannot be estimated: fewer than 20 picks).

    References
    ----------
    Cressie, N. (1993). *Statistics for Spatial Data*, revised ed. Wiley, New York, sect. 2.4
    (robust estimation of the variogram). https://doi.org/10.1002/9781119115151

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> s = np.arange(0.0, 5000.0, 5.0)                      # picks every 5 m along a line
    >>> e = np.convolve(rng.normal(size=s.size + 40), np.ones(40) / 40, "valid")[:s.size]
    >>> xyz = np.column_stack([s, 0.3 * s, 0.1 * s + 10 * e])
    >>> 80 < residual_correlation_m(xyz) < 160                 # moving average over 200 m
    True
    """
    p = np.asarray(xyz, dtype=float)
    n = len(p)
    if n < 20:
        return 0.0
    cid = np.zeros(n) if contact_id is None else np.asarray(contact_id, dtype=float).reshape(-1)
    if trend is not None:
        r = p[:, 2] - np.asarray(trend, dtype=float).reshape(-1)
    else:
        A = np.column_stack([np.ones(n), p[:, 0] - p[:, 0].mean(), p[:, 1] - p[:, 1].mean()])
        try:
            coef = robust_lstsq(A, p[:, 2])[0]
        except UndeterminedError:  # picks along one straight line: an ordinary fit will do
            coef = np.linalg.lstsq(A, p[:, 2], rcond=None)[0]
        r = p[:, 2] - A @ coef
    if not np.all(np.isfinite(r)):
        return 0.0
    sill = float(np.median((r - np.median(r)) ** 2)) / _MEDIAN_CHI2_1
    if sigma_m is not None and sill < (0.25 * float(sigma_m)) ** 2:
        return 0.0
    step = np.hypot(*np.diff(p[:, :2], axis=0).T)
    same = cid[1:] == cid[:-1]
    if not sill > 0 or not same.any():
        return 0.0
    ds = float(np.median(step[same]))
    if not ds > 0:
        return 0.0
    target = 1.0 - np.exp(-1.0)
    prev_lag, prev_g = 0.0, 0.0
    for k in range(1, min(int(max_lag_steps), n - 1) + 1):
        ok = cid[k:] == cid[:-k]
        if ok.sum() < 10:
            break
        g = float(np.median((r[k:][ok] - r[:-k][ok]) ** 2)) / (2 * _MEDIAN_CHI2_1) / sill
        lag = k * ds
        if g > target:
            return float(prev_lag + (target - prev_g) / (g - prev_g) * (lag - prev_lag))
        prev_lag, prev_g = lag, g
    return float(prev_lag)


def holdout_block_m(xy, *, vertex_spacing_m: float = 0.0, cell_m: float = 0.0,
                    correlation_m: float = 0.0) -> float:
    """Side of the square blocks that cut contacts into hold-out segments.

    ``max(typical_gap_m(xy), 2 × vertex_spacing_m, 2 × correlation_m, MIN_BLOCK_CELLS ×
    cell_m)``: about the typical distance from a map cell to the nearest pick, so a held-out
    pick lies about as far from the training data as a map cell lies from the picks; never
    shorter than two vertex spacings of the mapped lines nor than twice the correlation length
    of the picks' errors along the contacts (:func:`residual_correlation_m`) — otherwise a
    held-out pick is predicted by its own digitising neighbours, whose errors it shares — nor
    than a few grid cells.

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Pick positions, metres.
    vertex_spacing_m : float, default 0
        Median spacing of the vertices of the mapped lines, metres.
    cell_m : float, default 0
        Grid cell size, metres.
    correlation_m : float, default 0
        Correlation length of the pick errors along the contacts, metres.

    Returns
    -------
    float
        Metres (at least 1e-6).
    """
    return float(max(typical_gap_m(xy), 2.0 * float(vertex_spacing_m), 2.0 * float(correlation_m),
                     MIN_BLOCK_CELLS * float(cell_m), 1e-6))


def cross_validate(fit_predict: Callable, xyz, folds, *, fixed_xy=None, groups=None,
                   progress: Callable | None = None,
                   is_cancelled: Callable | None = None) -> CVScore:
    """k-fold cross-validation of a surface model on held-out picks.

    Parameters
    ----------
    fit_predict : callable
        ``fit_predict(train_index, test_index) -> z_pred`` fits the model to the picks
        ``train_index`` (plus any constraints, which are never held out) and returns the
        predicted elevations at the picks ``test_index``. A
        :class:`~strikeline.errors.UndeterminedError` (or other ``InputError``) raised by it
        makes the score ``nan`` with the message as ``reason``.
    xyz : array_like, shape ``(n, 3)``
        The picks.
    folds : array_like of int, shape ``(n,)``
        Fold index of every pick (:func:`make_folds`).
    fixed_xy : array_like, shape ``(m, 2)``, optional
        Positions of data that are in every training set (boreholes, dip measurements); used
        only for :attr:`CVScore.distance_m`.
    groups : array_like, shape ``(n,)``, optional
        The group of every pick, only to count them (:attr:`CVScore.n_groups`).
    progress, is_cancelled : callable, optional
        ``progress(fraction)`` after each fold; ``is_cancelled()`` checked before each fold.

    Returns
    -------
    CVScore

    Notes
    -----
    The pooled RMSE is ``sqrt(mean((ẑ_i − z_i)²))`` over all picks, each predicted by the
    model fitted without its fold (Stone 1974).

    References
    ----------
    Stone, M. (1974). Cross-validatory choice and assessment of statistical predictions.
    *Journal of the Royal Statistical Society, Series B*, 36(2), 111–147.
    https://doi.org/10.1111/j.2517-6161.1974.tb00994.x
    """
    p = np.asarray(xyz, dtype=float)
    folds = np.asarray(folds).reshape(-1)
    if len(folds) != len(p):
        raise InputError(f"folds must give one fold index per pick: {len(folds)} for {len(p)}")
    fixed = np.empty((0, 2)) if fixed_xy is None else np.asarray(fixed_xy, float).reshape(-1, 2)
    ks = np.unique(folds)
    err = np.full(len(p), np.nan)
    dist = np.full(len(p), np.nan)
    fold_rmse = np.full(len(ks), np.nan)
    for n_done, k in enumerate(ks):
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("cross-validation was cancelled")
        test = np.flatnonzero(folds == k)
        train = np.flatnonzero(folds != k)
        try:
            pred = np.asarray(fit_predict(train, test), dtype=float).reshape(-1)
        except InputError as exc:  # UndeterminedError included
            return CVScore(np.nan, fold_rmse, np.nan, len(p), np.nan, err,
                           f"fold {n_done + 1} of {len(ks)}: {exc}", dist, 0)
        e = pred - p[test, 2]
        err[test] = e
        fold_rmse[n_done] = np.sqrt(np.mean(e * e))
        tree = cKDTree(np.vstack([p[train, :2], fixed]))
        dist[test] = tree.query(p[test, :2])[0]
        if progress is not None:
            progress((n_done + 1) / len(ks))
    n_groups = int(len(np.unique(np.asarray(groups).reshape(-1)))) if groups is not None else 0
    if not np.all(np.isfinite(err)):
        return CVScore(np.nan, fold_rmse, np.nan, len(p), float(np.nanmedian(dist)), err,
                       "non-finite predictions", dist, n_groups)
    rmse = float(np.sqrt(np.mean(err * err)))
    se = float(np.std(fold_rmse, ddof=1) / np.sqrt(len(ks))) if len(ks) > 1 else np.nan
    return CVScore(rmse, fold_rmse, se, len(p), float(np.median(dist)), err, None, dist, n_groups)


@dataclass(frozen=True)
class ModelChoice:
    """A model chosen from cross-validation scores, and why.

    Attributes
    ----------
    chosen : str
    rule : str
        The rule applied (``'data_error'`` falls back to ``'one_se'`` without a stated error).
    best : str
        The model with the lowest cross-validation RMSE.
    tolerance_m : float
        How much worse than the best a simpler model may score and still be kept.
    sigma_m : float or None
        The stated pick error the scores were judged against.
    n_groups : int
        Independent held-out groups (degrees of freedom of the chi-square test).
    chi2 : mapping
        Per model: ``statistic``, ``critical`` (at ``1 - CHI2_ALPHA``) and ``consistent``.
    reason : str
        The choice in words.
    """

    chosen: str
    rule: str
    best: str
    tolerance_m: float
    sigma_m: float | None
    n_groups: int
    chi2: Mapping = field(default_factory=dict)
    reason: str = ""

    def summary(self) -> dict:
        """JSON-ready."""
        return {"rule": self.rule, "best": self.best, "tolerance_m": float(self.tolerance_m),
                "stated_pick_error_m": None if self.sigma_m is None else float(self.sigma_m),
                "n_groups": int(self.n_groups), "chi2_alpha": CHI2_ALPHA,
                "chi2": {k: dict(v) for k, v in self.chi2.items()}, "reason": self.reason}


def choose_model(scores: Mapping[str, CVScore], *, order: Sequence[str],
                 rule: str = "data_error", sigma_m: float | None = None,
                 n_groups: int | None = None, robust: bool = False) -> ModelChoice:
    """Choose a surface model from cross-validation scores, judged against the data error.

    Parameters
    ----------
    scores : mapping of str to CVScore
        Scores by model name; ``nan`` scores are never chosen.
    order : sequence of str
        Model names from the simplest to the most flexible.
    rule : {'data_error', 'one_se', 'min'}, default 'data_error'
        ``'min'``: the lowest RMSE. ``'one_se'``: the simplest model whose RMSE is within one
        standard error (:attr:`CVScore.se_m`) of the lowest (Breiman et al. 1984; Hastie,
        Tibshirani & Friedman 2009, sect. 7.10). ``'data_error'`` (needs ``sigma_m``): the
        simplest model whose RMSE exceeds the lowest by no more than the larger of that
        standard error and the stated pick error ``sigma_m`` — a more flexible model must
        gain more than the data's own error to be preferred — unless that model fails a
        chi-square test against the stated error while a more flexible one passes (below).
    sigma_m : float, optional
        Stated standard error of a pick (metres), e.g. the RMS of the per-pick errors from the
        DEM error and the contour positional error.
    n_groups : int, optional
        Number of independent held-out groups (contact segments); default the scores'
        :attr:`CVScore.n_groups`, else the number of held-out picks.
    robust : bool, default False
        Compare trimmed RMS errors (:func:`trimmed_mean_square`) instead of RMSEs
        everywhere: the model that fits the bulk of the picks, whatever a few gross errors do
        (used to choose the misfit check's model).

    Returns
    -------
    ModelChoice

    Raises
    ------
    InputError
        Unknown rule.
    UndeterminedError
        No model has a finite score.

    Notes
    -----
    Chi-square test of a model against the stated error: under the hypothesis that the
    model is right and the pick errors have standard deviation ``σ``, ``T = ν · RMSE² / σ²``
    follows a chi-square distribution with ``ν`` degrees of freedom (Bevington & Robinson
    2003, ch. 11). The mean square is estimated robustly, as the trimmed mean square of
    :func:`trimmed_mean_square` (the largest quarter of the errors left out), so that a
    mistraced stretch — a minority of gross errors — does not condemn a model that fits
    everything else. ``ν`` counts held-out groups, not picks, because errors along a contact
    segment are shared; the test rejects at level ``CHI2_ALPHA``, i.e. when
    ``T > χ²_{1−α}(ν)`` (``scipy.special.chdtri``). A model that fails it, when a more
    flexible model passes, is not kept: its residuals exceed the stated errors many times
    over. When no model passes (the stated error is too small for any of them) the tolerance
    rule alone decides.

    References
    ----------
    Bevington, P. R. & Robinson, D. K. (2003). *Data Reduction and Error Analysis for the
    Physical Sciences*, 3rd ed. McGraw-Hill, New York.

    Breiman, L., Friedman, J. H., Olshen, R. A. & Stone, C. J. (1984). *Classification and
    Regression Trees*. Wadsworth, Belmont, CA.

    Hastie, T., Tibshirani, R. & Friedman, J. (2009). *The Elements of Statistical Learning*,
    2nd ed. Springer, New York. https://doi.org/10.1007/978-0-387-84858-7

    Examples
    --------
    >>> import numpy as np
    >>> s = lambda r: CVScore(r, np.array([r, r]), 0.1, 100, 50.0, np.zeros(100), n_groups=40)
    >>> choose_model({"plane": s(2.3), "spline": s(2.0)}, order=["plane", "spline"],
    ...              sigma_m=2.0).chosen
    'plane'
    >>> choose_model({"plane": s(35.0), "spline": s(2.1)}, order=["plane", "spline"],
    ...              sigma_m=2.0).chosen
    'spline'
    """
    if rule not in SELECTION_RULES:
        raise InputError(f"selection rule must be one of {', '.join(SELECTION_RULES)}; "
                         f"got {rule!r}")
    finite = [m for m in order if m in scores and np.isfinite(scores[m].rmse_m)]
    if not finite:
        reasons = "; ".join(f"{m}: {scores[m].reason}" for m in order if m in scores)
        raise UndeterminedError(f"no surface model could be cross-validated ({reasons}); "
                                "add picks, or fit a single model without cross-validation")
    err = "trimmed cross-validation error" if robust else "cross-validation error"
    trimmed = {m: _trimmed_rms(scores[m]) for m in finite}
    if robust:
        scores = {m: _with_rmse(scores[m], trimmed[m]) for m in finite}
    best = min(finite, key=lambda m: scores[m].rmse_m)
    rb = scores[best].rmse_m
    se = scores[best].se_m if np.isfinite(scores[best].se_m) else 0.0
    skipped = [m for m in order if m in scores and m not in finite]
    tail = (" (" + ", ".join(f"{m} could not be scored" for m in skipped) + ")") if skipped else ""
    if rule == "data_error" and not (sigma_m is not None and float(sigma_m) > 0):
        rule_used = "one_se"
    else:
        rule_used = rule
    nu = int(n_groups) if n_groups else max((scores[m].n_groups for m in finite), default=0)
    nu = nu or int(scores[best].n_held_out)
    if rule_used == "min":
        return ModelChoice(best, "min", best, 0.0, sigma_m, nu, {},
                           f"{best} chosen: lowest {err} ({rb:.3g} m){tail}")
    tol = max(se, float(sigma_m)) if rule_used == "data_error" else se
    within = [m for m in finite if scores[m].rmse_m - rb <= tol]
    chosen = within[0]
    chi2 = {}
    if rule_used == "data_error":
        crit = float(chdtri(nu, CHI2_ALPHA))
        for m in finite:
            t = nu * trimmed[m] ** 2 / float(sigma_m) ** 2
            chi2[m] = {"statistic": float(t), "critical": crit, "consistent": bool(t <= crit),
                       "trimmed_rms_m": float(trimmed[m])}
    what = ("the larger of its standard error and the stated pick error"
            if rule_used == "data_error" else "one standard error")
    if chosen == best:
        words = (f"{best} chosen: lowest {err} ({rb:.3g} m)"
                 + ("" if len(finite) == 1 or chosen == finite[0] else
                    ", and no simpler model came within " + f"{tol:.3g} m ({what})"))
    else:
        words = (f"{chosen} chosen: its {err} ({scores[chosen].rmse_m:.3g} m) "
                 f"is within {tol:.3g} m ({what}) of the best, {best} ({rb:.3g} m); a more "
                 "flexible model would gain less than that")
    if chi2 and not chi2[chosen]["consistent"]:
        later = [m for m in finite[finite.index(chosen) + 1:] if chi2[m]["consistent"]]
        if later:
            old, chosen = chosen, later[0]
            words = (f"{chosen} chosen: {old} scored within the tolerance but its residuals "
                     f"(trimmed RMS {chi2[old]['trimmed_rms_m']:.3g} m) are far beyond the stated pick error "
                     f"({float(sigma_m):.3g} m; chi-square test with {nu} segments rejects it "
                     f"at {CHI2_ALPHA:g}), while {chosen} ({chi2[chosen]['trimmed_rms_m']:.3g} m) is "
                     "consistent with it")
        elif not any(v["consistent"] for v in chi2.values()):
            words += (f"; no model fits within the stated pick error ({float(sigma_m):.3g} m, "
                      "chi-square test): the errors may be understated or the surface more "
                      "complex than every model")
    return ModelChoice(chosen, rule_used, best, float(tol), None if sigma_m is None else
                       float(sigma_m), nu, chi2, words + tail)


def _trimmed_rms(score: CVScore) -> float:
    """The trimmed RMS of a score's held-out errors (its RMSE when it has none)."""
    e = np.asarray(score.errors_m, dtype=float)
    e = e[np.isfinite(e)]
    return float(np.sqrt(trimmed_mean_square(e))) if len(e) else float(score.rmse_m)


def _with_rmse(score: CVScore, rmse: float) -> CVScore:
    """The score with another RMSE (its standard error scaled alike)."""
    se = score.se_m * rmse / score.rmse_m if score.rmse_m > 0 else score.se_m
    return CVScore(rmse, score.fold_rmse_m, se, score.n_held_out, score.distance_m, score.errors_m,
                   score.reason, score.distances_m, score.n_groups)


#: Share of the largest errors a trimmed score leaves out: enough for a mistraced stretch or a
#: faulted block (here 15-20 % of a contact), too little for a model that fits only half the
#: picks to look good (a median-based score can be fooled that way).
TRIM_FRACTION = 0.25
#: Variance of a standard normal variable truncated to its central 75 % (Source: analytic,
#: 1 - 2 q phi(q) / 0.75 with q = 1.15035, the 87.5 % quantile; phi the normal density).
_TRIMMED_NORMAL_VAR = 0.368393


def trimmed_mean_square(errors) -> float:
    """Mean square of the errors without the largest ``TRIM_FRACTION`` of them, scaled to
    estimate the variance of normal errors (a trimmed estimator; Huber & Ronchetti 2009,
    ch. 3), robust to a minority of gross errors.

    Examples
    --------
    >>> import numpy as np
    >>> e = np.random.default_rng(0).normal(0, 2.0, 100000)
    >>> round(float(np.sqrt(trimmed_mean_square(e))), 1)
    2.0
    """
    e = np.sort(np.abs(np.asarray(errors, dtype=float).reshape(-1)))
    e = e[np.isfinite(e)]
    if not len(e):
        return float("nan")
    k = max(1, int(round((1 - TRIM_FRACTION) * len(e))))
    return float(np.mean(e[:k] ** 2) / _TRIMMED_NORMAL_VAR)


def select_model(scores: Mapping[str, CVScore], *, order: Sequence[str],
                 rule: str = "one_se", sigma_m: float | None = None) -> str:
    """The name chosen by :func:`choose_model` (see there for the rules).

    Examples
    --------
    >>> import numpy as np
    >>> s = lambda r, se: CVScore(r, np.array([r, r]), se, 10, 1.0, np.zeros(10))
    >>> select_model({"plane": s(1.05, 0.1), "spline": s(1.0, 0.1)}, order=["plane", "spline"])
    'plane'
    """
    return choose_model(scores, order=order, rule=rule, sigma_m=sigma_m).chosen


@dataclass(frozen=True)
class ErrorGrowth:
    """How a model's prediction error grows with distance from data, from cross-validation.

    The standard error of the surface at a point ``d`` metres from the nearest datum is
    ``kappa · sqrt(s(x)² + excess_m2 · (d / distance_ref_m) ** alpha)`` where ``s(x)`` is the
    model's own standard error (noise and parameter uncertainty); see
    :func:`fit_error_growth`.

    Attributes
    ----------
    excess_m2 : float
        Error variance beyond the model's own at ``distance_ref_m`` (robust estimate).
    alpha : float
        Growth exponent (0.5–2).
    distance_ref_m : float
        Median distance of held-out picks from the data that predicted them.
    kappa : float
        Calibration factor that makes 95 % of the held-out errors fall within 1.96 standard
        errors.
    n : int
        Held-out errors used.
    """

    excess_m2: float
    alpha: float
    distance_ref_m: float
    kappa: float
    n: int

    def excess_variance(self, d):
        """Excess error variance (m²) at distances ``d`` (metres)."""
        d = np.asarray(d, dtype=float)
        return self.excess_m2 * (np.maximum(d, 0.0) / self.distance_ref_m) ** self.alpha

    def summary(self) -> dict:
        return {"excess_m2": float(self.excess_m2), "alpha": float(self.alpha),
                "distance_ref_m": float(self.distance_ref_m), "kappa": float(self.kappa),
                "n_held_out": int(self.n)}


#: Median of a chi-square variable with one degree of freedom: median(e²) / this estimates
#: the variance of normal errors robustly (Source: scipy.special.chdtri(1, 0.5) = 0.45494).
_MEDIAN_CHI2_1 = 0.454936423119572


def fit_error_growth(errors_m, distance_m, base_se_m, *, n_bins: int = 8,
                     exclude_gross: bool = False) -> ErrorGrowth:
    """Fit the growth of prediction error with distance from held-out errors, and calibrate.

    Parameters
    ----------
    errors_m : array_like, shape ``(n,)``
        Held-out prediction errors (prediction minus observation), metres.
    distance_m : array_like, shape ``(n,)``
        Distance of each held-out pick to the nearest datum that predicted it.
    base_se_m : array_like, shape ``(n,)`` or scalar
        The model's own standard error at each held-out pick (noise plus parameter
        uncertainty).
    n_bins : int, default 8
        Distance classes (equal counts).
    exclude_gross : bool, default False
        Leave out gross errors first — beyond 5 standard errors of a first fit scaled on the
        median error, so that legitimately larger errors far from data stay in: the growth of
        the error of good data, for a check that looks for the gross errors (a mistraced
        stretch, a fault) which would otherwise widen its own tolerance.

    Returns
    -------
    ErrorGrowth

    Notes
    -----
    Like an empirical variogram of the prediction errors (Cressie 1993, ch. 2): held-out
    errors are grouped into distance classes; in each, the error variance is estimated
    robustly as ``median(e²) / 0.4549`` (so that a mistraced stretch or a fault does not
    inflate it) and the model's own variance is subtracted. A power law
    ``excess(d) = excess_m2 · (d / d_ref)^alpha`` is fitted to the positive excesses by least
    squares in log–log, ``alpha`` held within 0.5–2 (1 when fewer than two classes have an
    excess). Then ``kappa`` scales the whole standard error so that 95 % of the held-out
    errors lie within ±1.96 standard errors: the empirical calibration of prediction
    intervals by cross-validation (the idea of split-conformal prediction, Vovk, Gammerman &
    Shafer 2005; here with a scale fitted on the same held-out errors).

    References
    ----------
    Cressie, N. (1993). *Statistics for Spatial Data*, revised ed. Wiley, New York.
    https://doi.org/10.1002/9781119115151

    Vovk, V., Gammerman, A. & Shafer, G. (2005). *Algorithmic Learning in a Random World*.
    Springer, New York. https://doi.org/10.1007/b106715

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> d = rng.uniform(1, 100, 4000)
    >>> e = rng.normal(0, 1, 4000) * np.sqrt(1 + 0.04 * d)   # variance 1 + 0.04 d
    >>> g = fit_error_growth(e, d, 1.0)     # true excess at d_ref ≈ 50 m: 0.04 × 50 = 2 m²
    >>> 1.6 < g.excess_m2 < 2.5 and 0.7 < g.alpha < 1.4 and 0.9 < g.kappa < 1.1
    True
    """
    e = np.asarray(errors_m, dtype=float).reshape(-1)
    d = np.asarray(distance_m, dtype=float).reshape(-1)
    s = np.broadcast_to(np.asarray(base_se_m, dtype=float), e.shape).astype(float)
    ok = np.isfinite(e) & np.isfinite(d) & np.isfinite(s)
    e, d, s = e[ok], d[ok], s[ok]
    if exclude_gross and len(e) >= 10:
        # a first fit, scaled on the median error (robust), tells how large an error may be at
        # its distance; errors beyond 5 of those standard errors are gross and left out
        g0 = fit_error_growth(e, d, s, n_bins=n_bins)
        se0 = np.sqrt(s ** 2 + g0.excess_variance(d))
        with np.errstate(divide="ignore", invalid="ignore"):
            z0 = np.abs(e) / se0
        k0 = float(np.nanmedian(z0)) / 0.6744897501960817  # median |z| of a normal variable
        keep = ~(z0 > 5.0 * k0) if k0 > 0 else np.ones(len(e), bool)
        if keep.sum() >= 10:
            e, d, s = e[keep], d[keep], s[keep]
    if len(e) < 10:
        raise InputError(f"fit_error_growth needs at least 10 held-out errors, got {len(e)}")
    d_ref = float(np.median(d))
    if not d_ref > 0:
        d_ref = float(max(np.max(d), 1e-6))
    order = np.argsort(d, kind="stable")
    centres, excess, weights = [], [], []
    for idx in np.array_split(order, max(1, min(int(n_bins), len(e) // 5))):
        var = float(np.median(e[idx] ** 2)) / _MEDIAN_CHI2_1
        ex = var - float(np.mean(s[idx] ** 2))
        dm = float(np.median(d[idx]))
        if ex > 0 and dm > 0:
            centres.append(dm)
            excess.append(ex)
            weights.append(len(idx))
    alpha = 1.0
    if len(centres) >= 2 and np.ptp(np.log(centres)) > 0:
        A = np.column_stack([np.ones(len(centres)), np.log(np.asarray(centres) / d_ref)])
        w = np.sqrt(np.asarray(weights, float))
        coef = np.linalg.lstsq(A * w[:, None], np.log(excess) * w, rcond=None)[0]
        alpha = float(np.clip(coef[1], 0.5, 2.0))
    if centres:
        # scale at d_ref from all positive classes with the slope fixed
        c = np.asarray(centres) / d_ref
        excess_m2 = float(np.exp(np.average(np.log(excess) - alpha * np.log(c), weights=weights)))
    else:
        excess_m2 = 0.0
    se = np.sqrt(s ** 2 + excess_m2 * (d / d_ref) ** alpha)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.abs(e) / se
    z = z[np.isfinite(z)]
    kappa = float(np.quantile(z, 0.95) / 1.959963984540054) if len(z) else 1.0
    if not kappa > 0:
        kappa = 1.0
    return ErrorGrowth(excess_m2, alpha, d_ref, kappa, int(len(e)))


def gcv_from_spectrum(eigenvalues, projections, n: int, n_lambda):
    """Generalized cross-validation function V(λ) of a smoothing spline.

    Parameters
    ----------
    eigenvalues : array_like, shape ``(n - p,)``
        Eigenvalues ``μ_j >= 0`` of the reduced kernel matrix ``Q₂ᵀ K Q₂`` (``Q₂`` spans the
        orthogonal complement of the polynomial part's columns, ``p`` of them).
    projections : array_like, shape ``(n - p,)``
        ``b = Uᵀ Q₂ᵀ z``: the data in the eigenvector basis.
    n : int
        Number of data.
    n_lambda : float or array_like
        ``nλ`` (the smoothing parameter times ``n``), ``>= 0``. At ``0`` the limit
        ``λ → 0`` (interpolation) is returned.

    Returns
    -------
    V : ndarray
        ``V(λ) = (1/n) ||(I − A(λ)) z||² / [(1/n) tr(I − A(λ))]²``.
    rss : ndarray
        ``||(I − A(λ)) z||²``.
    trace : ndarray
        ``tr(I − A(λ))``, i.e. ``n`` minus the equivalent degrees of freedom.

    Notes
    -----
    For the spline minimising ``(1/n) Σ (z_i − f(x_i))² + λ J(f)`` the influence matrix
    satisfies ``I − A(λ) = nλ Q₂ U (Λ + nλ I)⁻¹ Uᵀ Q₂ᵀ`` (Wahba 1990), so
    ``||(I−A)z||² = Σ_j (nλ b_j / (μ_j + nλ))²`` and
    ``tr(I−A) = Σ_j nλ / (μ_j + nλ)``. At ``nλ = 0`` numerator and denominator both vanish;
    dividing each by ``(nλ)²`` gives ``V(0) = n Σ (b_j/μ_j)² / (Σ 1/μ_j)²``.

    References
    ----------
    Craven, P. & Wahba, G. (1979). Smoothing noisy data with spline functions: estimating the
    correct degree of smoothing by the method of generalized cross-validation. *Numerische
    Mathematik*, 31(4), 377–403. https://doi.org/10.1007/BF01404567

    Wahba, G. (1990). *Spline Models for Observational Data*. CBMS-NSF Regional Conference
    Series in Applied Mathematics 59, SIAM, Philadelphia. https://doi.org/10.1137/1.9781611970128
    """
    mu = np.clip(np.asarray(eigenvalues, dtype=float), 0.0, None)
    b = np.asarray(projections, dtype=float)
    nl = np.atleast_1d(np.asarray(n_lambda, dtype=float))
    V = np.empty(nl.shape)
    rss = np.empty(nl.shape)
    tr = np.empty(nl.shape)
    for i, a in enumerate(nl):
        if a > 0:
            f = a / (mu + a)
            rss[i] = np.sum((f * b) ** 2)
            tr[i] = np.sum(f)
            V[i] = n * rss[i] / tr[i] ** 2
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                inv = np.where(mu > 0, 1.0 / mu, 0.0)
            rss[i] = 0.0
            tr[i] = 0.0
            s = np.sum(inv)
            V[i] = n * np.sum((b * inv) ** 2) / s ** 2 if s > 0 else np.nan
    return V, rss, tr

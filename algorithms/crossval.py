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

from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import numpy as np
from scipy.spatial import cKDTree

from strikeline.errors import CancelledError, InputError, UndeterminedError

__all__ = [
    "CVScore",
    "make_folds",
    "spatial_block_groups",
    "segment_groups",
    "cross_validate",
    "select_model",
    "gcv_from_spectrum",
    "SELECTION_RULES",
]

#: Valid ``rule`` values of :func:`select_model`.
SELECTION_RULES = ("one_se", "min")


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
    """

    rmse_m: float
    fold_rmse_m: np.ndarray
    se_m: float
    n_held_out: int
    distance_m: float
    errors_m: np.ndarray
    reason: str | None = None


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


def cross_validate(fit_predict: Callable, xyz, folds, *, fixed_xy=None,
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
                           f"fold {n_done + 1} of {len(ks)}: {exc}")
        e = pred - p[test, 2]
        err[test] = e
        fold_rmse[n_done] = np.sqrt(np.mean(e * e))
        tree = cKDTree(np.vstack([p[train, :2], fixed]))
        dist[test] = tree.query(p[test, :2])[0]
        if progress is not None:
            progress((n_done + 1) / len(ks))
    if not np.all(np.isfinite(err)):
        return CVScore(np.nan, fold_rmse, np.nan, len(p), float(np.nanmedian(dist)), err,
                       "non-finite predictions")
    rmse = float(np.sqrt(np.mean(err * err)))
    se = float(np.std(fold_rmse, ddof=1) / np.sqrt(len(ks))) if len(ks) > 1 else np.nan
    return CVScore(rmse, fold_rmse, se, len(p), float(np.median(dist)), err, None)


def select_model(scores: Mapping[str, CVScore], *, order: Sequence[str],
                 rule: str = "one_se") -> str:
    """Choose a model from cross-validation scores.

    Parameters
    ----------
    scores : mapping of str to CVScore
        Scores by model name; ``nan`` scores are never chosen.
    order : sequence of str
        Model names from the simplest to the most flexible.
    rule : {'one_se', 'min'}, default 'one_se'
        ``'min'``: the lowest RMSE. ``'one_se'``: the simplest model whose RMSE is within one
        standard error (:attr:`CVScore.se_m`) of the lowest (Breiman et al. 1984; Hastie,
        Tibshirani & Friedman 2009, sect. 7.10), so a plane is not given up for a spline that
        is better only by the noise of the estimate.

    Returns
    -------
    str

    Raises
    ------
    InputError
        Unknown rule.
    UndeterminedError
        No model has a finite score.

    References
    ----------
    Breiman, L., Friedman, J. H., Olshen, R. A. & Stone, C. J. (1984). *Classification and
    Regression Trees*. Wadsworth, Belmont, CA.

    Hastie, T., Tibshirani, R. & Friedman, J. (2009). *The Elements of Statistical Learning*,
    2nd ed. Springer, New York. https://doi.org/10.1007/978-0-387-84858-7
    """
    if rule not in SELECTION_RULES:
        raise InputError(f"selection rule must be one of {', '.join(SELECTION_RULES)}; "
                         f"got {rule!r}")
    finite = [m for m in order if m in scores and np.isfinite(scores[m].rmse_m)]
    if not finite:
        reasons = "; ".join(f"{m}: {scores[m].reason}" for m in order if m in scores)
        raise UndeterminedError(f"no surface model could be cross-validated ({reasons}); "
                                "add picks, or fit a single model without cross-validation")
    best = min(finite, key=lambda m: scores[m].rmse_m)
    if rule == "min":
        return best
    se = scores[best].se_m
    limit = scores[best].rmse_m + (se if np.isfinite(se) else 0.0)
    for m in finite:  # simplest first
        if scores[m].rmse_m <= limit:
            return m
    return best  # pragma: no cover - best itself satisfies the limit


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

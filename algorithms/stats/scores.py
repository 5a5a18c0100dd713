"""Cross-validation scores: :func:`cross_validate` runs a ``fit_predict`` callable over grouped
folds and returns a :class:`CVScore` (pooled RMSE of the held-out picks, per-fold RMSE, the
distance at which it was measured); :func:`gcv_from_spectrum` is the generalized
cross-validation function of a smoothing spline from the eigen-decomposition of its reduced
kernel matrix.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy.spatial import cKDTree

from strikeline.errors import CancelledError, InputError


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

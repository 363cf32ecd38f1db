"""Turn a model description (:class:`~models.ratemodel.spec.ModelSpec`) and its data into a PyMC model.

This is the only module that builds PyMC graphs. Effects with plenty of data behind them use the
centred :class:`pymc.ZeroSumNormal` (measured faster and free of divergences here, compared with a
non-centred form), each block with its own learned scale so it is partially pooled toward zero.
"""

from __future__ import annotations

import numpy as np
import pymc as pm
import pytensor.tensor as pt

from models.exceptions import InputError
from models.fitting.gate import unobserved_cells
from models.fitting.geometry import choose_geometry
from models.ratemodel.bases import annual_basis, within_day_basis, year_phase
from models.ratemodel.design import DAY_KINDS, JointData, ModelData
from models.ratemodel.spec import ModelSpec

__all__ = ["build_joint_model", "build_model"]


#: Sd of each weekday's log loading on the daily deviation (``spec.latent_by_weekday``): a
#: weekday's deviations from about a third to three times the typical size are well inside it.
LATENT_LOADING_SIGMA = 0.5


def build_model(data: ModelData, spec: ModelSpec) -> pm.Model:
    """Build the log-rate model with named dims ``dow``, ``slot``, ``day`` and ``bin`` (and
    ``annual_term`` / ``within_term`` when those terms are on).

    Counts are Poisson given the rate, or negative binomial (mean ``mu``, variance
    ``mu + mu**2 / dispersion[slot]``, deterministic ``dispersion`` with dims ``slot``) when
    ``spec.observation == "negbin"``.

    Parameters
    ----------
    data
        Binned history in model coordinates.
    spec
        Which terms and priors.

    Returns
    -------
    pymc.Model
        With the deterministic ``week_log_rate`` (dims ``dow``, ``slot``): the log rate per hour of
        each weekly cell at the trend origin on an ordinary day with no latent deviation.
    """
    feats = data.features
    coords = {**data.coords, "bin": np.arange(len(data.count))}
    priors = spec.priors
    closed = unobserved_cells(data)
    open_dow: np.ndarray = np.asarray(~closed.all(axis=1))
    open_slot: np.ndarray = np.asarray(~closed.all(axis=0))
    with pm.Model(coords=coords) as model:
        if priors.baseline_gamma is not None:
            shape, rate = priors.baseline_gamma
            baseline_rate = pm.Gamma("baseline_rate", alpha=shape, beta=rate)
            baseline = pm.Deterministic("baseline", pt.log(baseline_rate))
        else:
            baseline = pm.Normal(
                "baseline", mu=np.log(max(data.mean_rate, 1e-3)), sigma=priors.baseline_sigma
            )

        week = pt.zeros((7, spec.slots_per_day)) + baseline
        if spec.day_of_week:
            dow_sd = pm.HalfNormal("dow_sd", sigma=priors.dow_scale)
            dow_effect = _effect("dow_effect", dow_sd, (open_dow,), ("dow",), model)
            week = week + dow_effect[:, None]
        if spec.has_time_of_day:
            slot_sd = pm.HalfNormal("slot_sd", sigma=priors.slot_scale)
            slot_effect = _effect("slot_effect", slot_sd, (open_slot,), ("slot",), model)
            week = week + slot_effect[None, :]
        geometry = choose_geometry(data, spec)
        if spec.interaction and spec.has_time_of_day:
            # Shrinks toward the additive weekly shape as interaction_sd -> 0.
            interaction_sd = pm.HalfNormal("interaction_sd", sigma=priors.interaction_scale)
            cells = (open_dow, open_slot)
            if geometry.centred_interaction:
                interaction = _effect("interaction", interaction_sd, cells, ("dow", "slot"), model)
            else:
                # Non-centred: the data measure a cell less well than the interaction's spread,
                # so the centred form funnels as interaction_sd -> 0 (r_hat 1.7 measured on 4
                # weeks of sparse hourly data, 1.09 on 8 busy weeks with an additive shape).
                raw = _effect("interaction_raw", 1.0, cells, ("dow", "slot"), model)
                interaction = pm.Deterministic(
                    "interaction", interaction_sd * raw, dims=("dow", "slot")
                )
            week = week + interaction
        week_log_rate = pm.Deterministic("week_log_rate", week, dims=("dow", "slot"))

        log_rate = week_log_rate[feats.dow, feats.slot]
        if spec.trend:
            trend = pm.Normal("trend", mu=0.0, sigma=priors.trend_sigma)
            log_rate = log_rate + trend * feats.years
        if spec.holidays is not None:
            holiday_effect = pm.Normal("holiday_effect", mu=0.0, sigma=priors.holiday_sigma)
            log_rate = log_rate + holiday_effect * feats.holiday
            if data.calendar.holiday_names:
                log_rate = log_rate + _named_holidays(
                    data, holiday_effect, priors.holiday_spread_scale
                )
        if spec.annual_harmonics:
            annual = pm.Normal("annual", 0.0, priors.annual_sigma, dims="annual_term")
            # One value per history day, gathered to the bins (keeps the graph's constants small).
            days = np.datetime64(data.calendar.first_day, "D") + np.arange(data.n_days)
            basis = annual_basis(year_phase(days), spec.annual_harmonics)
            log_rate = log_rate + _columns_times(basis, annual)[feats.day]
        if spec.within_day:
            # Non-centred: a day's shape weights are informed by that day's bins only.
            within_sd = pm.HalfNormal(
                "within_day_sd", sigma=priors.within_day_scale, dims="within_term"
            )
            within_raw = pm.Normal("within_day_raw", 0.0, 1.0, dims=("day", "within_term"))
            within = pm.Deterministic(
                "within_day", within_raw * within_sd[None, :], dims=("day", "within_term")
            )
            # The (day, slot) table of shape deviations, gathered to the bins.
            basis = within_day_basis(spec.slots_per_day, spec.within_day)
            table = _columns_times(basis[None, :, :], within.T[:, :, None])
            cell = feats.day * spec.slots_per_day + feats.slot
            log_rate = log_rate + table.ravel()[cell]
        if spec.latent_daily:
            rho = pm.Beta("latent_rho", alpha=3.0, beta=2.0)
            latent_sd = pm.HalfNormal("latent_sd", sigma=priors.latent_scale)
            if spec.centred_latent:
                latent = pm.AR(
                    "latent",
                    rho=[rho],
                    sigma=latent_sd,
                    init_dist=pm.Normal.dist(0.0, latent_sd / pt.sqrt(1.0 - rho**2)),
                    ar_order=1,
                    constant=False,
                    dims="day",
                )
            else:
                innovation = pm.Normal("latent_innovation", 0.0, 1.0, dims="day")
                path = _ar1_from_innovations(innovation, rho, latent_sd, data.n_days)
                if spec.latent_by_weekday:
                    # Each weekday feels the day-level deviation with its own loading (log
                    # loadings sum to zero over the kinds seen, so latent_sd stays the overall
                    # size): a commuter station's weekdays move a few percent, its weekends
                    # several times more (docs/evidence.md).
                    # Holidays are a kind of their own: one holiday effect leaves Christmas and a
                    # quiet federal Monday far apart, and that must not widen ordinary Mondays.
                    kinds = data.calendar.day_kinds(np.arange(data.n_days))
                    seen = np.isin(np.arange(len(DAY_KINDS)), np.unique(kinds[feats.day]))
                    log_loading = _effect(
                        "latent_log_loading", LATENT_LOADING_SIGMA, (seen,), ("day_kind",), model
                    )
                    loading = pm.Deterministic(
                        "latent_loading", pt.exp(log_loading), dims="day_kind"
                    )
                    path = path * loading[kinds]
                latent = pm.Deterministic(
                    "latent",
                    _level_free(path, data.n_days, trend=spec.trend),
                    dims="day",
                )
            log_rate = log_rate + latent[feats.day]

        if spec.observation == "negbin":
            log_k = _log_dispersion(
                spec, series=None, centred=geometry.centred_dispersion, open_slot=open_slot
            )
            _negbin_counts(log_rate + np.log(data.exposure_hours), log_k, feats.slot, data.count)
        else:
            mean = pt.exp(log_rate) * data.exposure_hours
            pm.Poisson("arrivals", mu=mean, observed=data.count, dims="bin")
    return model


def _named_holidays(
    data: ModelData, common: pt.TensorVariable, spread_scale: float
) -> pt.TensorVariable:
    """Each named holiday's deviation from the common holiday effect, per bin (0 elsewhere).

    Memorial Day empties a commuter station, Columbus Day hardly moves it; one shared effect
    sits between them and misses both. Centred where the history measures a holiday better than
    the prior spread (its arrivals give a standard error 1 / sqrt(n) below half the spread's
    prior scale): there the non-centred form mixed badly (bulk ESS 106 of 800 draws, r_hat 1.02,
    on two years of daily counts of about 500 a day), because the common effect and the
    deviations trade off once the sum is pinned. Non-centred where holidays hold few arrivals.
    """
    feats = data.features
    fitted = {name: i for i, name in enumerate(data.calendar.holiday_names)}
    per_name = np.array([fitted.get(name, -1) for name in feats.holiday_names], dtype=np.int64)
    index = np.where(feats.holiday_index >= 0, per_name[feats.holiday_index], -1)
    arrivals = np.bincount(index[index >= 0], weights=data.count[index >= 0], minlength=len(fitted))
    spread = pm.HalfNormal("holiday_spread", sigma=spread_scale)
    if np.median(arrivals) * (0.5 * spread_scale) ** 2 >= 1.0:
        total = pm.Normal("holiday_named_total", common, spread, dims="holiday_name")
        named = pm.Deterministic("holiday_named", total - common, dims="holiday_name")
    else:
        raw = pm.Normal("holiday_named_raw", 0.0, 1.0, dims="holiday_name")
        named = pm.Deterministic("holiday_named", spread * raw, dims="holiday_name")
    return named[np.maximum(index, 0)] * (index >= 0)


def _negbin_logp(
    value: pt.TensorVariable,
    log_mu: pt.TensorVariable,
    log_k: pt.TensorVariable,
    k: pt.TensorVariable,
    log_gamma_ratio: pt.TensorVariable,
) -> pt.TensorVariable:
    """Negative binomial log pmf of ``value`` with mean ``exp(log_mu)`` and size ``k``.

    ``log Γ(n + k) - log Γ(k) - log Γ(n + 1) + n (log μ - log(μ + k)) + k (log k - log(μ + k))``,
    with ``t = log(1 + μ / k) = softplus(log μ - log k)`` so that no bin needs ``μ`` itself.
    ``log_gamma_ratio`` is ``log Γ(n + k) - log Γ(k)`` for the observed ``n`` (see
    :func:`_negbin_counts`), so this logp is valid for the observed counts only, which is all a
    fit evaluates.
    """
    t = pt.softplus(log_mu - log_k)
    return log_gamma_ratio - pt.gammaln(value + 1.0) + value * (log_mu - log_k - t) - k * t


def _negbin_counts(
    log_mu: pt.TensorVariable, log_k: pt.TensorVariable, group: np.ndarray, count: np.ndarray
) -> None:
    """The observed ``arrivals`` (dims ``bin``), negative binomial with log mean ``log_mu`` per
    bin and log size ``log_k[group]`` (one size per slot, or per series and slot).

    ``log Γ(n + k) - log Γ(k)`` depends on a bin only through its (group, count) pair, so it is
    evaluated once per distinct pair and gathered: its gradient needs two digammas per pair
    instead of per bin (26 weeks of hourly bins hold 4,367 bins but only a few hundred pairs).
    """
    group = np.asarray(group, dtype=np.int64)
    count = np.asarray(count, dtype=np.int64)
    key = group * (int(count.max(initial=0)) + 1) + count
    _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    pair_group, pair_count = group[first], count[first].astype(float)
    k_table = pt.exp(log_k)
    k_pair = k_table[pair_group]
    ratio = pt.gammaln(pair_count + k_pair) - pt.gammaln(k_pair)
    pm.CustomDist(
        "arrivals",
        log_mu,
        log_k[group],
        k_table[group],
        ratio[inverse.ravel()],
        logp=_negbin_logp,
        observed=count,
        dims="bin",
    )


def _log_dispersion(
    spec: ModelSpec, *, series: int | None, centred: bool, open_slot: np.ndarray | None = None
) -> pt.TensorVariable:
    """Log of the negative binomial dispersion per slot (the deterministic ``dispersion`` is its
    exponential), dims ``slot``, or ``(series, slot)`` for a joint model with ``series``
    members, each with its own.

    The prior sits on log(1/sqrt(k)), the log coefficient of variation of the gamma noise, which
    reads as "how noisy is a bin relative to its rate"; slots deviate from the series' value with
    a learned spread, as a zero-sum effect (so the series' value is their mean and not traded
    against them), centred for data-rich series and non-centred otherwise.
    """
    priors = spec.priors
    lead: tuple[str, ...] = () if series is None else ("series",)
    shape_lead: tuple[int, ...] = () if series is None else (series,)
    log_cv = pm.Normal(
        "log_overdispersion",
        mu=np.log(priors.overdispersion_median),
        sigma=priors.overdispersion_log_sd,
        dims=lead or None,
    )
    log_cv = log_cv[..., None]
    if spec.dispersion_by_slot and spec.has_time_of_day:
        spread = pm.HalfNormal(
            "overdispersion_slot_sd", sigma=priors.overdispersion_slot_scale, dims=lead or None
        )
        if series is None and open_slot is not None and not open_slot.all():
            # Slots never observed keep the series' value (see _effect).
            model = pm.modelcontext(None)
            if centred:
                slot_effect = _effect("overdispersion_slot", spread, (open_slot,), ("slot",), model)
            else:
                raw = _effect("overdispersion_slot_raw", 1.0, (open_slot,), ("slot",), model)
                slot_effect = spread * raw
        elif centred:
            slot_effect = pm.ZeroSumNormal(
                "overdispersion_slot", sigma=spread[..., None], dims=(*lead, "slot")
            )
        else:
            raw = pm.ZeroSumNormal("overdispersion_slot_raw", sigma=1.0, dims=(*lead, "slot"))
            slot_effect = spread[..., None] * raw
        log_cv_slot = log_cv + slot_effect
    else:
        log_cv_slot = log_cv + pt.zeros((*shape_lead, spec.slots_per_day))
    log_k = -2.0 * log_cv_slot
    pm.Deterministic("dispersion", pt.exp(log_k), dims=(*lead, "slot"))
    return log_k


def _effect(
    name: str,
    sigma: pt.TensorVariable | float,
    observed: tuple[np.ndarray, ...],
    dims: tuple[str, ...],
    model: pm.Model,
) -> pt.TensorVariable:
    """A zero-sum effect over ``dims`` whose entries never observed in the history are 0.

    When every entry of ``dims`` is observed (``observed`` holds one boolean mask per dim) this
    is ``pm.ZeroSumNormal(name, dims=dims)``. Otherwise the free variable ``{name}_open`` lives
    on dims ``open_<dim>`` (the observed entries only) and sums to zero over them, and ``name``
    is the deterministic with the never-observed entries set to 0. Left free, those entries
    are informed by the prior alone, and a zero sum over them ties the level of every observed
    entry to their prior draws: the baseline, every open slot and every closed slot then move
    together along a ridge (measured on half-hourly call-centre counts, closed nights and
    weekends: bulk ESS 19 and r_hat 1.11 for the slot effects at 2 x 500 draws). A closed
    entry forecasts nothing (its bins have no exposure), so 0 loses nothing.
    """
    if all(mask.all() for mask in observed):
        return pm.ZeroSumNormal(name, sigma=sigma, n_zerosum_axes=len(dims), dims=dims)
    open_dims = tuple(f"open_{dim}" for dim in dims)
    for dim, open_dim, mask in zip(dims, open_dims, observed, strict=True):
        if open_dim not in model.coords:
            model.add_coord(open_dim, np.asarray(model.coords[dim])[mask])
    free = pm.ZeroSumNormal(f"{name}_open", sigma=sigma, n_zerosum_axes=len(dims), dims=open_dims)
    shape = tuple(len(mask) for mask in observed)
    where = np.ravel_multi_index(np.ix_(*(np.flatnonzero(m) for m in observed)), shape).ravel()
    full = pt.set_subtensor(pt.zeros(int(np.prod(shape)))[where], free.ravel())
    return pm.Deterministic(name, full.reshape(shape), dims=dims)


def _columns_times(basis: np.ndarray, weights: pt.TensorVariable) -> pt.TensorVariable:
    """``sum_j basis[..., j] * weights[j]``, as elementwise products one term at a time.

    Written out rather than as a matrix product, which PyTensor would hand to BLAS (which pip
    installs lack). ``weights[j]`` broadcasts against ``basis[..., j]``.
    """
    total = basis[..., 0] * weights[0]
    for j in range(1, basis.shape[-1]):
        total = total + basis[..., j] * weights[j]
    return total


def _level_free(path: pt.TensorVariable, n_days: int, *, trend: bool) -> pt.TensorVariable:
    """The latent path less its mean over the history (and, with a trend, less its least-squares
    line over the days), so the baseline is the history's level and the trend its slope.

    Without this the path's level trades against the baseline (and its drift against the trend)
    along a ridge the data cannot resolve, widest when ``latent_rho`` nears 1: on the battery the
    divergent draws sat apart on the baseline and the early innovations (docs/fit-gate.md).
    """
    if n_days < 2:
        return path
    centred = path - path.mean()
    if not trend or n_days < 3:
        return centred
    days = np.arange(n_days) - (n_days - 1) / 2.0
    return centred - days * ((centred * days).sum() / float(np.sum(days**2)))


#: Days per block of the AR(1) path: a dense product inside each block, a carry between blocks.
_AR1_BLOCK = 32


def _ar1_from_innovations(
    innovation: pt.TensorVariable, rho: pt.TensorVariable, sd: pt.TensorVariable, n_days: int
) -> pt.TensorVariable:
    """Stationary AR(1) path ``z[k] = rho z[k-1] + sd e[k]``, the first day from the stationary
    law (``sd / sqrt(1 - rho**2)``), as a deterministic function of standard-normal innovations.

    Days are taken in blocks of :data:`_AR1_BLOCK`: within a block the path is a dense triangular
    product (``rho**(i - j)`` for ``j <= i``), and each block adds the previous block's last value
    times ``rho**(i + 1)``. The cost is O(days x block) per gradient rather than the O(days**2)
    of one dense product over the whole history (which dominated the gradient on a year of
    hourly data), and there is no scan.
    """
    # Keep rho off 0 and 1: the gradient of rho**0 is 0 * rho**-1, and the numba backend raises
    # ZeroDivisionError (rather than returning nan) when an extreme warm-up step rounds rho to 0,
    # which stopped sampling on real hourly data; near 1 the stationary scale blows up.
    rho = pt.clip(rho, 1e-6, 1.0 - 1e-6)
    size = min(_AR1_BLOCK, n_days)
    blocks = -(-n_days // size)
    first = pt.set_subtensor(pt.ones(n_days)[0], 1.0 / pt.sqrt(1.0 - rho**2))
    shocks = pt.concatenate([innovation * first, pt.zeros(blocks * size - n_days)])
    lag = np.subtract.outer(np.arange(size), np.arange(size))
    lower = lag >= 0
    within = pt.switch(lower, rho ** np.where(lower, lag, 0), 0.0)
    # (block, day in block); a broadcast sum rather than a matrix product, which PyTensor would
    # hand to BLAS (absent from pip installs; its fallback warns and logs rewrite failures).
    local = (shocks.reshape((blocks, 1, size)) * within[None, :, :]).sum(axis=2)
    decay = rho ** np.arange(1, size + 1)
    parts = []
    carry: pt.TensorVariable | float = 0.0
    for b in range(blocks):
        part = local[b] + decay * carry
        parts.append(part)
        carry = part[-1]
    return sd * pt.concatenate(parts)[:n_days]


def build_joint_model(data: JointData, spec: ModelSpec) -> pm.Model:
    """Build the multi-series model (see :mod:`models.fitting.joint`) with dims ``series``, ``dow``,
    ``slot``, ``day`` and ``bin``.

    Variables carry the single-series names with a leading ``series`` dim, so selecting one series
    from the posterior gives exactly the layout of :func:`build_model`.
    """
    if spec.holiday_effects == "named":
        raise InputError(
            "holiday_effects 'named' is for single-series fits; a group shares one holiday "
            "effect per series (holiday_effects 'shared')"
        )
    members = data.members
    n_series = len(members)
    coords = {
        "series": list(data.names),
        **members[0].coords,
        "bin": np.arange(sum(len(m.count) for m in members)),
    }
    series_of_bin = np.concatenate([np.full(len(m.count), s) for s, m in enumerate(members)])
    dow = np.concatenate([m.features.dow for m in members])
    slot = np.concatenate([m.features.slot for m in members])
    day = np.concatenate([m.features.day for m in members])
    years = np.concatenate([m.features.years for m in members])
    holiday = np.concatenate([m.features.holiday for m in members])
    exposure = np.concatenate([m.exposure_hours for m in members])
    count = np.concatenate([m.count for m in members])
    priors = spec.priors
    with pm.Model(coords=coords) as model:
        level = np.log(np.maximum([m.mean_rate for m in members], 1e-3))
        baseline = pm.Normal("baseline", mu=level, sigma=priors.baseline_sigma, dims="series")
        # The shared weekly shape.
        dow_sd = pm.HalfNormal("dow_sd", sigma=priors.dow_scale)
        slot_sd = pm.HalfNormal("slot_sd", sigma=priors.slot_scale)
        shared = (
            pm.ZeroSumNormal("dow_effect", sigma=dow_sd, dims="dow")[:, None]
            + pm.ZeroSumNormal("slot_effect", sigma=slot_sd, dims="slot")[None, :]
        )
        if spec.interaction:
            interaction_sd = pm.HalfNormal("interaction_sd", sigma=priors.interaction_scale)
            raw = pm.ZeroSumNormal(
                "interaction_raw", sigma=1.0, n_zerosum_axes=2, dims=("dow", "slot")
            )
            shared = shared + interaction_sd * raw
        # Series-level deviations from it, each block with its own per-series scale (non-centred:
        # a young series has little data behind its deviations).
        main_sd = pm.HalfNormal("deviation_main_sd", sigma=priors.dow_scale, dims="series")
        cell_sd = pm.HalfNormal("deviation_cell_sd", sigma=priors.interaction_scale, dims="series")
        dev_dow = pm.ZeroSumNormal("deviation_dow_raw", sigma=1.0, dims=("series", "dow"))
        dev_slot = pm.ZeroSumNormal("deviation_slot_raw", sigma=1.0, dims=("series", "slot"))
        dev_cell = pm.ZeroSumNormal(
            "deviation_cell_raw", sigma=1.0, n_zerosum_axes=2, dims=("series", "dow", "slot")
        )
        deviation = main_sd[:, None, None] * (dev_dow[:, :, None] + dev_slot[:, None, :]) + (
            cell_sd[:, None, None] * dev_cell
        )
        week_log_rate = pm.Deterministic(
            "week_log_rate",
            baseline[:, None, None] + shared[None, :, :] + deviation,
            dims=("series", "dow", "slot"),
        )
        log_rate = week_log_rate[series_of_bin, dow, slot]
        if spec.trend:
            trend = pm.Normal("trend", 0.0, priors.trend_sigma, dims="series")
            log_rate = log_rate + trend[series_of_bin] * years
        if spec.holidays is not None:
            holiday_effect = pm.Normal("holiday_effect", 0.0, priors.holiday_sigma, dims="series")
            log_rate = log_rate + holiday_effect[series_of_bin] * holiday
        if spec.latent_daily:
            rho = pm.Beta("latent_rho", alpha=3.0, beta=2.0, dims="series")
            latent_sd = pm.HalfNormal("latent_sd", sigma=priors.latent_scale, dims="series")
            innovation = pm.Normal("latent_innovation", 0.0, 1.0, dims=("series", "day"))
            paths = [
                _level_free(
                    _ar1_from_innovations(innovation[s], rho[s], latent_sd[s], data.n_days),
                    data.n_days,
                    trend=spec.trend,
                )
                for s in range(n_series)
            ]
            latent = pm.Deterministic("latent", pt.stack(paths), dims=("series", "day"))
            log_rate = log_rate + latent[series_of_bin, day]
        if spec.observation == "negbin":
            log_k = _log_dispersion(spec, series=n_series, centred=False)
            _negbin_counts(
                log_rate + np.log(exposure),
                log_k.ravel(),
                series_of_bin * spec.slots_per_day + slot,
                count,
            )
        else:
            mean = pt.exp(log_rate) * exposure
            pm.Poisson("arrivals", mu=mean, observed=count, dims="bin")
    return model

"""The plan search: the cheapest sample rate and anti-alias filter, lines and record.

:func:`plan` searches candidate sample rates and analog anti-alias filters for the
cheapest setup (lowest rate, then fewest poles, then the plainest family) that keeps
every tone's alias out of the band of interest, or below a required level, over the
whole speed range; it then picks the analysis lines that meet the required resolution
and reports record length, each tone's worst alias and why every cheaper option fails.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sampled sinusoid).
.. [2] J. O. Smith III, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Resolving sinusoids".
.. [5] Common practice (no single source): span fs/2.56, bin width span/lines.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from service.core.chain import Chain
from service.core.stages import Sample, Stage
from service.core.tones import ToneSet

from .analysis_lines import MAINLOBE_BINS, SPAN_DIVISOR, check_analysis_window, record_length
from .checks import check_finite, check_int, check_positive
from .errors import InputError
from .filter_catalogue import DEFAULT_FILTERS, FilterOption
from .folding import fold_unchecked
from .plan_common import (
    ANALYSER_RATES_HZ,
    CONVERTER_RATES_HZ,
    RATE_SERIES,
    PlanImpossible,
    find_tone,
    fmt_db,
    fmt_hz,
    fmt_num,
    fmt_rate,
)
from .plan_engine import (
    ALIAS,
    BAND_LOSS,
    PASS,
    RESOLUTION,
    SPAN,
    SearchOutcome,
    SearchProblem,
    critical_freqs,
    evaluate_setups,
    prepare_problem,
    speed_at,
    speed_of_alias,
)
from .plan_model import (
    ALIAS_ABOVE_LIMIT,
    BAND_LOSS_TOO_HIGH,
    RESOLUTION_NOT_MET,
    SPAN_TOO_SHORT,
    Plan,
    PlanRequest,
    RejectedOption,
    ToneAlias,
)

__all__ = [
    "plan",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


_MAX_RATES = 1000


_MAX_FILTERS = 100
#: The most analysis lines any setup offers (the same limit as lines_options).
MAX_LINES = 1_048_576


def _check_rates(rates_hz: object, series: object) -> FloatArray:
    if rates_hz is None:
        if series not in RATE_SERIES:
            raise InputError(
                f"rate_series={series!r} must be one of {', '.join(RATE_SERIES)}",
                field="rate_series",
                code="not_allowed",
                value=series,
            )
        return np.asarray(RATE_SERIES[str(series)], dtype=np.float64)
    try:
        vals = list(rates_hz)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"rates_hz={rates_hz!r} must be a list of sample rates in Hz",
            field="rates_hz",
            code="bad_type",
            value=rates_hz,
        ) from None
    if not vals:
        raise InputError(
            "rates_hz is empty; give at least one sample rate (Hz)", field="rates_hz", code="empty"
        )
    if len(vals) > _MAX_RATES:
        raise InputError(
            f"rates_hz has {len(vals)} entries; at most {_MAX_RATES}",
            field="rates_hz",
            code="above_limit",
        )
    out = [
        check_positive(v, f"rates_hz[{i}]", unit=" Hz", separate=True) for i, v in enumerate(vals)
    ]
    return np.unique(np.asarray(out, dtype=np.float64))


def _check_filters(filters: object) -> tuple[FilterOption, ...]:
    if filters is None:
        return DEFAULT_FILTERS
    try:
        vals = list(filters)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"filters={filters!r} must be a list of FilterOption",
            field="filters",
            code="bad_type",
            value=filters,
        ) from None
    if not vals:
        raise InputError(
            "filters is empty; give at least one FilterOption (family 'none' for no filter)",
            field="filters",
            code="empty",
        )
    if len(vals) > _MAX_FILTERS:
        raise InputError(
            f"filters has {len(vals)} entries; at most {_MAX_FILTERS}",
            field="filters",
            code="above_limit",
        )
    for i, v in enumerate(vals):
        if not isinstance(v, FilterOption):
            raise InputError(
                f"filters[{i}]={v!r} must be a FilterOption",
                field=f"filters[{i}]",
                code="bad_type",
                value=v,
            )
    return tuple(sorted(vals, key=lambda o: o.cost()))


def _check_lines_options(options: object) -> tuple[int, ...]:
    try:
        vals = list(options)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"lines_options={options!r} must be a list of whole numbers",
            field="lines_options",
            code="bad_type",
            value=options,
        ) from None
    if not vals:
        raise InputError(
            "lines_options is empty; give at least one number of lines",
            field="lines_options",
            code="empty",
        )
    return tuple(
        sorted(
            {
                check_int(v, f"lines_options[{i}]", 1, MAX_LINES, word="a whole number")
                for i, v in enumerate(vals)
            }
        )
    )


def _required_bin(
    req: PlanRequest, prob: SearchProblem, mainlobe: float
) -> tuple[float | None, str]:
    """Largest allowed bin width, Hz, and a phrase saying where it comes from."""
    need: float | None = None
    why = ""
    if req.bin_width_hz is not None:
        need = check_positive(req.bin_width_hz, "bin_width_hz", unit=" Hz", separate=True)
        why = f"the requested {fmt_hz(need)} bins"
    if req.resolve is not None:
        try:
            name_a, name_b = req.resolve
        except (TypeError, ValueError):
            raise InputError(
                f"resolve={req.resolve!r} must be two tone labels",
                field="resolve",
                code="bad_type",
                value=req.resolve,
            ) from None
        a = find_tone(prob.tones, name_a, "resolve[0]")
        b = find_tone(prob.tones, name_b, "resolve[1]")
        if a == b:
            raise InputError(
                f"resolve names the same tone twice ({name_a!r})", field="resolve", code="conflict"
            )
        f = prob.f_grid.reshape(prob.n_speeds, prob.n_tones)
        diff = f[:, a] - f[:, b]
        if np.any(diff == 0) or np.any(np.sign(diff[:-1]) != np.sign(diff[1:])):
            raise InputError(
                f"the tones {name_a!r} and {name_b!r} meet in frequency within the speed "
                "range, so no bin width resolves them at every speed",
                field="resolve",
                code="not_resolvable",
            )
        sep = float(np.min(np.abs(diff)))
        b_need = sep / mainlobe
        if need is None or b_need < need:
            need = b_need
            why = (
                f"resolving {name_a!r} and {name_b!r} ({fmt_hz(sep)} apart, "
                f"{fmt_num(mainlobe)}-bin main lobe)"
            )
    return need, why


def _tone_name(tones: ToneSet, i: int) -> str:
    return f"{tones.label[i]} ({tones.source[i]})"


def _speed_phrase(
    prob: SearchProblem, i: int, true_hz: float, s_range: tuple[float, float], rpm: float | None
) -> str:
    if prob.tones.speed_hz[i] == 0 or s_range[1] == s_range[0]:
        return ""
    s = speed_of_alias(prob, i, true_hz, *s_range)
    if rpm is not None:
        return f" at {fmt_num(s * rpm, 4)} rpm"
    return f" at {fmt_num(100 * s, 3)} % of nominal speed"


def _level_text(level_db: float, prob: SearchProblem) -> str:
    if prob.reference_db is not None:
        return fmt_db(level_db - prob.reference_db)
    return fmt_num(10.0 ** (level_db / 20.0))


def _limit_text(req: PlanRequest) -> str:
    if req.rejection_db is not None:
        return f"{fmt_num(float(req.rejection_db))} dB rejection"
    return f"the floor of {fmt_num(float(req.floor or 0.0))}"


class _Context:
    """Request, prepared problem and checked options, for sentences and suggestions."""

    def __init__(self, req: PlanRequest) -> None:
        self.req = req
        self.prob, meta = prepare_problem(req)
        self.s_range: tuple[float, float] = meta["speed_range"]  # type: ignore[assignment]
        self.window = check_analysis_window(req.window)
        self.mainlobe = MAINLOBE_BINS[self.window]
        self.rates = _check_rates(req.rates_hz, req.rate_series)
        self.filters = _check_filters(req.filters)
        self.lines_options = _check_lines_options(req.lines_options)
        record_length(1000.0, 100, req.averages, req.overlap_pct)  # validates both
        self.max_loss = check_finite(req.max_band_loss_db, "max_band_loss_db")
        if self.max_loss < 0:
            raise InputError(
                f"max_band_loss_db={req.max_band_loss_db!r} must be >= 0 dB",
                field="max_band_loss_db",
                code="below_limit",
                value=req.max_band_loss_db,
            )
        self.rpm = (
            None
            if req.nominal_rpm is None
            else check_positive(req.nominal_rpm, "nominal_rpm", unit=" rpm", separate=True)
        )
        self.required_bin, self.bin_why = _required_bin(req, self.prob, self.mainlobe)

    def run(
        self,
        rates: FloatArray,
        filters: tuple[FilterOption, ...],
        stop: bool,
        prob: SearchProblem | None = None,
    ) -> SearchOutcome:
        return evaluate_setups(
            prob or self.prob,
            rates,
            filters,
            self.required_bin,
            self.lines_options,
            self.max_loss,
            stop,
        )

    def reason(self, out: SearchOutcome, r: int, k: int) -> RejectedOption:
        fs = float(out.rates[r])
        opt = out.filters[k]
        cut = out.cutoffs[r][k]
        code = int(out.code[r, k])
        hi = self.prob.band[1]
        if code == SPAN:
            text = (
                f"at {fmt_rate(fs)} the span fs/2.56 = {fmt_hz(fs / SPAN_DIVISOR)} does not "
                f"reach the band edge {fmt_hz(hi)}"
            )
            return RejectedOption(fs, opt, cut, SPAN_TOO_SHORT, text)
        if code == RESOLUTION:
            n = max(self.lines_options)
            text = (
                f"at {fmt_rate(fs)} even {n:,} lines give {fmt_hz(fs / (SPAN_DIVISOR * n))} "
                f"bins, wider than the {fmt_hz(self.required_bin or 0.0)} needed for "
                f"{self.bin_why}"
            )
            return RejectedOption(fs, opt, cut, RESOLUTION_NOT_MET, text)
        if code == BAND_LOSS:
            text = (
                f"at {fmt_rate(fs)} {opt.describe(cut)} takes {out.band_loss[r, k]:.1f} dB "
                f"off the band, more than the {fmt_num(self.max_loss)} dB allowed"
            )
            return RejectedOption(fs, opt, cut, BAND_LOSS_TOO_HIGH, text)
        i = int(out.tone[r, k])
        f_true = float(out.true_hz[r, k])
        app = float(fold_unchecked(np.asarray(f_true), fs))
        ex = float(out.excess[r, k])
        level_db = ex + self.prob.limit_db
        limit = "limit" if self.prob.reference_db is not None else "floor"
        text = (
            f"at {fmt_rate(fs)} with {opt.describe(cut)} the "
            f"{_tone_name(self.prob.tones, i)} folds to {fmt_hz(app)} at "
            f"{_level_text(level_db, self.prob)}, {fmt_num(ex, 2)} dB above your {limit}"
            f"{_speed_phrase(self.prob, i, f_true, self.s_range, self.rpm)}"
        )
        s = speed_of_alias(self.prob, i, f_true, *self.s_range)
        return RejectedOption(fs, opt, cut, ALIAS_ABOVE_LIMIT, text, i, s, app, ex)


def plan(request: PlanRequest) -> Plan:
    """Choose the cheapest sample rate and anti-alias filter, lines and record length.

    Parameters
    ----------
    request : PlanRequest
        Tones, band (Hz), speed range, rejection (dB) or floor (amplitude unit),
        resolution (Hz or two tones), candidate rates (Hz), filters, lines, averages.

    Returns
    -------
    Plan

    Raises
    ------
    PlanImpossible
        No offered setup meets the requirements; ``suggestions`` says what would.
    ValueError
        Invalid input (the message names the field, the value and the limit).

    Notes
    -----
    Cost order: lowest sample rate; then fewest filter poles; then no filter, a
    measured table, Bessel, Butterworth, Chebyshev I, Chebyshev II, elliptic. A rate
    qualifies when its span fs/2.56 covers the band [5]_ and a line count from
    ``lines_options`` gives bins no wider than required (main-lobe width rule [2]_).
    A filter qualifies when its loss inside the band stays within
    ``max_band_loss_db`` and, on a speed grid of ``n_speeds`` points, every alias
    (true frequency above fs/2, folded by ``|f - fs·round(f/fs)|`` [1]_) that lands in
    the band is at or below the limit. Beside the grid, each tone's lowest true
    frequency that folds into the band is checked exactly: for a low-pass filter whose
    loss grows with frequency this is where its in-band alias is strongest, so the
    grid cannot step over it. Tones without an amplitude are taken at the level of the
    strongest tone with one (all at one common level when none has one). Without a
    resolution requirement the plan uses 3200 lines (or the smallest offered count
    when 3200 is not offered).

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    .. [2] Smith, *Spectral Audio Signal Processing*, "Resolving sinusoids".
    .. [5] Common practice: span fs/2.56, bin width span/lines.
    """
    ctx = _Context(request)
    out = ctx.run(ctx.rates, ctx.filters, stop=True)
    passing = np.argwhere(out.code == PASS)
    if passing.size == 0:
        raise _impossible(ctx, out)
    order = np.argsort(out.rates, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    r_win, k_win = min(((int(r), int(k)) for r, k in passing), key=lambda p: (rank[p[0]], p[1]))
    rejected: list[RejectedOption] = []
    for r in order:
        if rank[r] > rank[r_win]:
            break
        if out.code[r, 0] in (SPAN, RESOLUTION):
            rejected.append(ctx.reason(out, int(r), 0))
            continue
        for k in range(len(ctx.filters)):
            if r == r_win and k >= k_win:
                break
            rejected.append(ctx.reason(out, int(r), k))
    return _build_plan(ctx, out, r_win, k_win, tuple(rejected))


def _build_plan(
    ctx: _Context, out: SearchOutcome, r: int, k: int, rejected: tuple[RejectedOption, ...]
) -> Plan:
    prob, req = ctx.prob, ctx.req
    fs = float(out.rates[r])
    opt = out.filters[k]
    cut = out.cutoffs[r][k]
    stages: list[Stage] = []
    if prob.sensor is not None:
        stages.append(prob.sensor)
    st = opt.stage(cut)
    if st is not None:
        stages.append(st)
    stages.append(Sample(fs))
    chain = Chain(tuple(stages))

    # The chosen chain, through the chain engine: the grid plus each tone's critical
    # frequency, in one call.
    s_n, t_n = prob.n_speeds, prob.n_tones
    crit = critical_freqs(prob, np.array([fs]))[0]
    resp = chain.evaluate(np.concatenate([prob.f_grid, np.nan_to_num(crit, nan=0.0)]))
    lo, hi = prob.band
    app = resp.apparent_hz
    hit = (resp.zone > 1) & (app >= lo) & (app <= hi)
    hit[s_n * t_n :] &= np.isfinite(crit)
    amp_db = np.concatenate([np.tile(prob.amp_db, s_n), prob.amp_db])
    lev = np.where(hit, amp_db - resp.attenuation_db, -np.inf).reshape(s_n + 1, t_n)
    j = np.argmax(lev, axis=0)
    worst = lev[j, np.arange(t_n)]
    flat = j * t_n + np.arange(t_n)
    f_true = resp.freq_hz[flat]
    speeds = speed_at(prob.tones, f_true, *ctx.s_range)
    reports = []
    for i in range(t_n):
        ok = bool(np.isfinite(worst[i]))
        nan = math.nan
        s = float(speeds[i]) if ok else nan
        reports.append(
            ToneAlias(
                index=i,
                label=str(prob.tones.label[i]),
                source=str(prob.tones.source[i]),
                aliases_into_band=ok,
                true_hz=float(f_true[i]) if ok else nan,
                apparent_hz=float(app[flat[i]]) if ok else nan,
                zone=int(resp.zone[flat[i]]) if ok else 0,
                speed_factor=s,
                rpm=(s * ctx.rpm if ctx.rpm is not None and ok and math.isfinite(s) else None),
                level=float(10.0 ** (worst[i] / 20.0)) if ok else nan,
                level_db=float(worst[i]) if ok else nan,
                margin_db=float(prob.limit_db - worst[i]) if ok else nan,
                amplitude_assumed=bool(prob.assumed[i]),
            )
        )
    margins = [t.margin_db for t in reports if t.aliases_into_band]
    rec = record_length(fs, int(out.lines[r]), req.averages, req.overlap_pct)
    return Plan(
        sample_rate_hz=fs,
        filter=opt,
        cutoff_hz=cut,
        chain=chain,
        band_hz=prob.band,
        record=rec,
        window=ctx.window,
        mainlobe_bins=ctx.mainlobe,
        required_bin_hz=ctx.required_bin,
        limit_db=prob.limit_db,
        reference_db=prob.reference_db,
        worst_margin_db=min(margins) if margins else math.inf,
        band_loss_db=float(out.band_loss[r, k]),
        speed_range=ctx.s_range,
        tones=tuple(reports),
        rejected=rejected,
        residual_risk=tuple(_residual_risk(ctx, chain)),
        **_amplitude_basis(prob, reports),
    )


def _amplitude_basis(prob: SearchProblem, reports: list[ToneAlias]) -> dict[str, str]:
    """Which amplitude assumption set the plan (see :class:`Plan`), code and sentence."""
    binding = [t for t in reports if t.aliases_into_band]
    worst = min(binding, key=lambda t: t.margin_db) if binding else None
    if prob.n_tones and bool(prob.assumed.all()):
        return {
            "amplitude_basis": "all_unknown",
            "amplitude_basis_text": (
                "No tone has an amplitude, so every tone was taken at one common level: the "
                "rejection is each alias's attenuation relative to the in-band tones."
            ),
        }
    if prob.reference_assumed:
        name = str(prob.tones.label[prob.reference_tone])
        weakest = fmt_num(prob.weakest_known_db, 3)
        return {
            "amplitude_basis": "unknown_reference_as_weakest",
            "amplitude_basis_text": (
                f"The allowed alias level is set by '{name}', whose amplitude is not given: "
                f"it was taken as weak as the weakest tone with one ({weakest} dB), the "
                "cautious side; give its amplitude to plan for its real level."
            ),
        }
    if worst is not None and worst.amplitude_assumed:
        return {
            "amplitude_basis": "unknown_alias_as_strongest",
            "amplitude_basis_text": (
                f"The binding alias is of '{worst.label}', whose amplitude is not given: it "
                "was taken as strong as the strongest tone with one, the cautious side; give "
                "its amplitude to plan for its real level."
            ),
        }
    return {
        "amplitude_basis": "known",
        "amplitude_basis_text": (
            "The binding alias and the allowed alias level come from tones with given amplitudes."
        ),
    }


def _residual_risk(ctx: _Context, chain: Chain) -> list[str]:
    prob = ctx.prob
    notes: list[str] = []
    n_assumed = int(prob.assumed.sum())
    if n_assumed == prob.n_tones:
        notes.append(
            "no tone has an amplitude, so every tone was taken at one common level: the "
            "rejection is the attenuation each alias gets relative to the in-band tones"
        )
    elif n_assumed:
        notes.append(
            f"{n_assumed} tone(s) without an amplitude were assumed as strong as the "
            "strongest tone with one where their aliases count, and as weak as the weakest "
            "one where they set the allowed alias level; a stronger unknown tone would need "
            "more rejection"
        )
    notes.append(
        "only the listed tones were checked: broadband content and unlisted tones above "
        f"{fmt_hz(chain.sample_rate_hz / 2)} fold into the band too, attenuated by the same "
        "filter"
    )
    if ctx.s_range[1] > ctx.s_range[0]:
        notes.append(
            f"speeds outside {fmt_num(100 * ctx.s_range[0], 3)} to "
            f"{fmt_num(100 * ctx.s_range[1], 3)} % of nominal were not checked"
        )
    if prob.sensor is not None:
        notes.append(
            "the sensor resonance was checked on the speed grid only; a tone "
            "sweeping through it between grid points can be a little stronger"
        )
    notes.extend(chain.validate())
    return notes


def _impossible(ctx: _Context, out: SearchOutcome) -> PlanImpossible:
    prob, req = ctx.prob, ctx.req
    lo, hi = prob.band
    rates = out.rates
    fs_max = float(rates.max())
    codes = out.code
    span_ok = codes[:, 0] != SPAN
    if not span_ok.any():
        need = SPAN_DIVISOR * hi
        return PlanImpossible(
            f"no listed rate covers the band up to {fmt_hz(hi)}: the highest, {fmt_rate(fs_max)}, "
            f"gives a span of {fmt_hz(fs_max / SPAN_DIVISOR)}",
            [
                f"offer a sample rate of at least {fmt_rate(need)} (the span fs/2.56 must reach "
                f"{fmt_hz(hi)})",
                f"or narrow the band to {fmt_hz(lo)} to {fmt_hz(fs_max / SPAN_DIVISOR)}",
            ],
        )
    usable = span_ok & (codes[:, 0] != RESOLUTION)
    if not usable.any():
        fs = float(rates[span_ok].min())
        n = max(ctx.lines_options)
        bin_hz = fs / (SPAN_DIVISOR * n)
        need = ctx.required_bin or bin_hz
        # log2 of each factor, so a tiny required bin (down to 5e-324 Hz) stays finite.
        doublings = math.log2(fs) - math.log2(SPAN_DIVISOR * 100) - math.log2(need)
        lines_needed = 100 * 2 ** max(0, math.ceil(doublings))
        more_lines = (
            f"offer more analysis lines ({lines_needed:,} at {fmt_rate(fs)})"
            if lines_needed <= MAX_LINES
            else f"no number of analysis lines up to {MAX_LINES:,} gives {fmt_hz(need)} bins at "
            f"{fmt_rate(fs)}: relax the resolution"
        )
        lowest = SPAN_DIVISOR * hi
        return PlanImpossible(
            f"no listed setup meets the resolution: the lowest usable rate, {fmt_rate(fs)}, "
            f"with {n:,} lines gives {fmt_hz(bin_hz)} bins; {fmt_hz(need)} are needed for "
            f"{ctx.bin_why}",
            [
                more_lines,
                f"or relax the resolution to {fmt_hz(bin_hz)}",
                f"or offer a rate nearer {fmt_rate(lowest)}, the lowest whose span covers the band",
                "or narrow the band so that a lower rate covers it",
            ],
        )
    alias = usable[:, None] & (codes == ALIAS)
    if not alias.any():
        loss = float(out.band_loss[usable].min())
        return PlanImpossible(
            f"every listed filter takes more than {fmt_num(ctx.max_loss)} dB off the band "
            f"(the least: {loss:.1f} dB)",
            [
                f"allow up to {math.ceil(loss * 10) / 10:g} dB band loss (max_band_loss_db)",
                "or put the cutoff at the band edge (give neither cutoff_hz nor cutoff_fraction)",
            ],
        )
    ex = np.where(alias, out.excess, np.inf)
    flat_best = int(np.argmin(ex))
    r, k = flat_best // ex.shape[1], flat_best % ex.shape[1]
    i = int(out.tone[r, k])
    excess = float(out.excess[r, k])
    level_db = excess + prob.limit_db
    fs_best = float(rates[r])
    msg = (
        f"no listed option reaches {_limit_text(req)}: the best, {fmt_rate(fs_best)} with "
        f"{out.filters[k].describe(out.cutoffs[r][k])}, leaves the "
        f"{_tone_name(prob.tones, i)} at {_level_text(level_db, prob)}, "
        f"{fmt_num(excess, 2)} dB above your "
        f"{'limit' if prob.reference_db is not None else 'floor'}"
        f"{_speed_phrase(prob, i, float(out.true_hz[r, k]), ctx.s_range, ctx.rpm)}"
    )
    return PlanImpossible(msg, _suggestions(ctx, out, r, k, excess))


def _suggestions(ctx: _Context, out: SearchOutcome, r: int, k: int, excess: float) -> list[str]:
    prob, req = ctx.prob, ctx.req
    rates = out.rates
    fs_max = float(rates.max())
    tips: list[str] = []
    # A higher rate than any offered, with the offered filters.
    higher = sorted(
        {x for x in (*CONVERTER_RATES_HZ, *ANALYSER_RATES_HZ) if fs_max < x <= 64 * fs_max}
        | {fs_max * 2.0**n for n in range(1, 7)}
    )
    more = ctx.run(np.asarray(higher), ctx.filters, stop=True)
    ok = np.argwhere(more.code == PASS)
    if ok.size:
        rr, kk = min(((int(a), int(b)) for a, b in ok), key=lambda p: (more.rates[p[0]], p[1]))
        tips.append(
            f"offer {fmt_rate(float(more.rates[rr]))} (it passes with "
            f"{more.filters[kk].describe(more.cutoffs[rr][kk])})"
        )
    # A steeper filter at the best rate.
    opt = out.filters[k]
    fam = opt.family if opt.family not in ("none", "table") else "butterworth"
    steeper = tuple(
        FilterOption(
            fam,
            n,
            ripple_db=opt.ripple_db if fam == opt.family else None,
            stop_atten_db=opt.stop_atten_db if fam == opt.family else None,
            cutoff_hz=opt.cutoff_hz if fam == opt.family else None,
            cutoff_fraction=opt.cutoff_fraction if fam == opt.family else None,
        )
        for n in range(max(opt.order, 0) + 1, 21)
    )
    if steeper:
        st = ctx.run(rates[r : r + 1], steeper, stop=True)
        good = np.flatnonzero(st.code[0] == PASS)
        if good.size:
            g = int(good[0])
            what = steeper[g].describe(st.cutoffs[0][g])
            article = "an" if what[:1] in "8" or what[:2] in ("11", "18") else "a"
            tips.append(f"or {article} {what} at {fmt_rate(float(rates[r]))}")
    # A lower requirement.
    if req.rejection_db is not None:
        tips.append(f"or accept {math.floor(float(req.rejection_db) - excess)} dB rejection")
    else:
        tips.append(f"or accept a floor of {fmt_num(float(req.floor or 0) * 10 ** (excess / 20))}")
    # A narrower band, with the best option.
    lo, hi = prob.band
    one_rate, one_filter = rates[r : r + 1], (opt,)

    def passes(h: float) -> bool:
        sub = SearchProblem(**{**prob.__dict__, "band": (lo, h)})
        res = ctx.run(one_rate, one_filter, stop=True, prob=sub)
        return bool(res.code[0, 0] == PASS)

    h_low = lo + 0.01 * (hi - lo)
    if passes(h_low):
        a, b = h_low, hi
        for _ in range(20):
            mid = 0.5 * (a + b)
            a, b = (mid, b) if passes(mid) else (a, mid)
        tips.append(f"or narrow the band to {fmt_hz(lo)}–{fmt_hz(a)}")
    return tips

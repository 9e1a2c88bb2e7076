"""Benefits on two lives that depend on the order of the deaths: reversionary annuities and
contingent insurances.

They are valued on a status of two members (a joint-life or last-survivor basis, whose
``members`` are the two single-life bases; the kind of status does not matter to these
benefits, its members do). ``life`` names the member x whose death the benefit is about
(0 or 1); the other member is y. The lifetimes must be independent (common-shock force 0),
and each member keeps its own fractional-age rule, so the values are exact for the basis.

With Sₓ, S_y the members' survival, Qₓ = 1 − Sₓ and fₓ = Sₓ μₓ:

* reversionary annuity a_{x|y}: 1/m each 1/m year (times ``proportion``) while y lives after
  the death of x, Y = Σ aₖ 1{Tₓ ≤ tₖ < T_y} with aₖ discounted, so
  E[Y] = Σ aₖ Qₓ(tₖ) S_y(tₖ) and, as 1{Tₓ ≤ tⱼ} 1{Tₓ ≤ tₖ} = 1{Tₓ ≤ tⱼ} for j < k,
  E[Y²] = Σₖ aₖ S_y(tₖ) (aₖ Qₓ(tₖ) + 2 Σ_{j<k} aⱼ Qₓ(tⱼ)): positive terms, O(n);
  the textbook identity a_{x|y} = a_y − a_xy holds term by term;
* contingent insurance A¹_xy (``order`` "first"): 1 on the death of x if y is then alive,
  E[Z] = ∫ b v(pay) fₓ S_y ds, and A²_xy ("second"): 1 on the death of x after y,
  E[Z] = ∫ b v(pay) fₓ Q_y ds, paid at the moment of death or at the end of the year (or
  1/m year) of x's death; E[Z²] alike with b² v². Gauss–Legendre panels have edges at both
  members' kinks, the payment periods and the term, so every integrand is smooth on each.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import values as pv
from .amounts import discounted, year_index
from .errors import DomainError, fmt

ORDERS = ("first", "second")


def _pair(valuation: pv.Valuation, life: int, what: str):
    """(model x, ages x, durations x, model y, ages y, durations y) of the two members."""
    model = valuation.model
    if getattr(model, "n_members", 1) != 2 or not hasattr(model, "members"):
        raise DomainError(
            "type",
            f"a {what} needs a basis of two lives (a joint-life or last-survivor basis with two "
            f"members, the lives given by ages [x, y]); this basis is of "
            f"{getattr(model, 'n_members', 1)} life or lives",
        )
    if getattr(model, "lam", 0.0) != 0.0:
        raise DomainError(
            "type",
            f"a {what} is valued on independent lives: give the basis common_shock_force 0 "
            f"(got {fmt(model.lam)})",
        )
    if life not in (0, 1):
        raise DomainError("life", f"life must be 0 or 1, the member whose death counts (got {life!r})")
    x, y = life, 1 - life
    age, duration = valuation.age, valuation.duration
    return (model.members[x], age[:, x], duration[:, x],
            model.members[y], age[:, y], duration[:, y])


def _end(model, age, duration, term, discount):
    """Where the member that the benefit needs alive (or dying) stops mattering: its horizon,
    the term or the discount floor; whole-life values must converge there."""
    horizon = np.broadcast_to(np.asarray(model.horizon(age, duration), float), age.shape)
    end = pv._end_of_cover(horizon, 0.0, term, discount)
    pv._check_tail(model, age, duration, end, discount, term is None or bool(np.any(end < term)),
                  term_end=term)
    return end


def _survival(model, age, duration, t):
    return pv._survival_from(model.cumulative_hazard(age, duration, t))


def _dead(model, age, duration, t):
    """ₜq without cancellation: −expm1(−H)."""
    h = model.cumulative_hazard(age, duration, t)
    with np.errstate(over="ignore", invalid="ignore"):
        return np.where(np.isfinite(h), -np.expm1(-h), 1.0)


@dataclass(frozen=True)
class ReversionaryAnnuity:
    """1 a year in payments of 1/m each 1/m year (times ``proportion``) to y while y lives
    after the death of x; for ``term`` years from now when given."""

    timing: str = "advance"
    frequency: int = 1
    term: float | None = None
    proportion: float = 1.0
    life: int = 0

    def default_premium_term(self) -> float | None:
        return self.term

    def check(self, valuation: pv.Valuation) -> None:
        _pair(valuation, self.life, "reversionary annuity")
        if self.timing not in ("advance", "arrears"):
            raise DomainError("timing", "timing must be one of advance, arrears")
        if not (math.isfinite(self.proportion) and 0.0 < self.proportion <= 1e6):
            raise DomainError(
                "proportion",
                f"proportion must be more than 0 (the spouse's share of 1) (got {fmt(self.proportion)})",
            )
        pv.check_benefit(self._annuity(), valuation.discount)

    def _annuity(self) -> pv.LifeAnnuity:
        return pv.LifeAnnuity(timing=self.timing, frequency=self.frequency, term=self.term)

    def moments(self, valuation: pv.Valuation):
        mx, ax, dx, my, ay, dy = _pair(valuation, self.life, "reversionary annuity")
        discount = valuation.discount
        end = _end(my, ay, dy, self.term, discount)
        t, paid, _ = pv._annuity_payments(self._annuity(), float(np.max(end)), discount)
        paid = paid * self.proportion
        n = ay.shape[0]
        first, second = np.zeros(n), np.zeros(n)
        for sl in pv._chunks(n, t.size):
            q_x = _dead(mx, ax[sl], dx[sl], t)
            s_y = _survival(my, ay[sl], dy[sl], t)
            prior = np.cumsum(paid * q_x, axis=1) - paid * q_x
            first[sl] = np.sum(paid * q_x * s_y, axis=1)
            second[sl] = np.sum(paid * s_y * (paid * q_x + 2.0 * prior), axis=1)
        return first, second


@dataclass(frozen=True)
class ContingentInsurance:
    """1 on the death of x if it comes before the death of y (``order`` "first": A¹_xy) or
    after it ("second": A²_xy); within ``term`` years when given."""

    timing: str = "end-of-year"
    frequency: int = 1
    term: float | None = None
    order: str = "first"
    life: int = 0

    def default_premium_term(self) -> float | None:
        return self.term

    def check(self, valuation: pv.Valuation) -> None:
        _pair(valuation, self.life, "contingent insurance")
        if self.order not in ORDERS:
            raise DomainError("order", f"order must be one of {', '.join(ORDERS)}")
        pv.check_benefit(self._insurance(), valuation.discount)

    def _insurance(self) -> pv.LifeInsurance:
        return pv.LifeInsurance(timing=self.timing, frequency=self.frequency, term=self.term)

    def moments(self, valuation: pv.Valuation):
        mx, ax, dx, my, ay, dy = _pair(valuation, self.life, "contingent insurance")
        discount = valuation.discount
        end = _end(mx, ax, dx, self.term, discount)
        top = float(np.max(end))
        b = self._insurance()
        if b.timing == "moment-of-death":
            edges = np.array([0.0, top])
        else:
            edges, _ = pv._death_periods(b, top, discount)
        n = ax.shape[0]
        first, second = np.zeros(n), np.zeros(n)
        for idx, t, w in _pair_nodes(mx, ax, dx, my, ay, dy, edges, discount):
            if b.timing == "moment-of-death":
                log_v = discount.log_v(t)
            else:  # paid at the end of the period of death
                k = np.clip(np.searchsorted(edges, t, side="right"), 1, edges.size - 1)
                log_v = discount.log_v(edges[k])
            bv = discounted(b, year_index(t, 0.0), log_v)
            for sl in pv._chunks(idx.size, t.size):
                i = idx[sl]
                dens = pv.density_at(mx, ax[i], dx[i], t)
                other = (_survival(my, ay[i], dy[i], t) if self.order == "first"
                         else _dead(my, ay[i], dy[i], t))
                weight = dens * other
                first[i] += pv.row_dot(weight, w * bv)
                second[i] += pv.row_dot(weight, w * bv * bv)
        return first, second


def _pair_nodes(mx, ax, dx, my, ay, dy, edges, discount):
    """Gauss–Legendre nodes for groups of lives whose two members share their kink phases:
    panels break at both members' kinks (and limiting ages), at ``edges`` and at whole years."""
    px = np.round(np.asarray(mx.kink_phase(ax, dx), float), 12)
    py = np.round(np.asarray(my.kink_phase(ay, dy), float), 12)
    keys, inverse = np.unique(np.stack([px, py], axis=1), axis=0, return_inverse=True)
    lo, hi = float(edges[0]), float(edges[-1])
    joint = _Joint(mx, my)
    for g, (phase_x, phase_y) in enumerate(keys):
        idx = np.flatnonzero(inverse.ravel() == g)
        extra = [edges]
        for model, ages in ((mx, ax[idx]), (my, ay[idx])):
            omega = getattr(model, "limiting_age", math.inf)
            if math.isfinite(omega):
                ends = np.unique(omega - ages)
                extra.append(ends[(ends > lo) & (ends < hi)][:64])
        cut = pv._panel_edges(lo, hi, (float(phase_x), float(phase_y)),
                              list(np.concatenate(extra)), discount, None, None)
        pv._check_count(cut.size * 4)
        both = np.stack([ax[idx], ay[idx]], axis=1), np.stack([dx[idx], dy[idx]], axis=1)
        t, w = pv._nodes(joint, both[0], both[1], cut)
        if t.size == 0:
            continue
        pv._check_count(t.size / 16)
        yield idx, t, w


class _Joint:
    """The summed cumulative hazard of the two members (to size the quadrature panels)."""

    def __init__(self, mx, my):
        self.mx, self.my = mx, my

    def cumulative_hazard(self, age, duration, t):
        with np.errstate(over="ignore", invalid="ignore"):
            return (self.mx.cumulative_hazard(age[:, 0], duration[:, 0], t)
                    + self.my.cumulative_hazard(age[:, 1], duration[:, 1], t))

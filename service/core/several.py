"""Statuses of several lives: joint life (until the first death) and last survivor.

Lives are given by ages of shape (N, m), one column per member (and durations alike). With a
common-shock force λ ≥ 0 every member's survival is multiplied by e^(−λt), which is the
common-shock model of a shock that kills all members at once; otherwise the members'
lifetimes are independent. With Sᵢ = ₜp of member i:

* joint life:     ₜp = e^(−λt) Π Sᵢ,             μ = λ + Σ μᵢ;
* last survivor:  ₜp = e^(−λt) (1 − Π (1 − Sᵢ)), μ = λ + Σᵢ fᵢ Π_{j≠i} (1 − Sⱼ) / (1 − Π (1 − Sⱼ)),

with fᵢ = Sᵢ μᵢ the member's density. The cumulative hazard of the last-survivor status is
λt − log(−expm1(Σ log ₜqᵢ)), with log ₜqᵢ = log(−expm1(−Hᵢ)): no cancellation either when the
members are almost surely alive or almost surely dead. Moments, curtate moments and quantiles
come from :class:`GenericModel` on panels between the kinks of all members.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from .errors import DomainError, fmt
from .generic import NEGLIGIBLE_HAZARD, GenericModel, check_single_life
from .lifetime import MAX_HORIZON, LifetimeModel, as_float_array

MAX_MEMBERS = 8


class SeveralLives(GenericModel):
    """The joint-life (``joint=True``) or last-survivor status of ``members``."""

    def __init__(self, members: Sequence[LifetimeModel], joint: bool, common_shock_force: float = 0.0):
        if not 2 <= len(members) <= MAX_MEMBERS:
            raise DomainError(
                "members", f"a status needs 2 to {MAX_MEMBERS} members (got {len(members)})"
            )
        for i, member in enumerate(members):
            check_single_life(member, f"members[{i}]")
        lam = float(common_shock_force)
        if not (math.isfinite(lam) and lam >= 0.0):
            raise DomainError(
                "common_shock_force",
                f"common_shock_force must be a finite number of at least 0 (got {fmt(lam)})",
            )
        self.members = list(members)
        self.n_members = len(members)
        self.joint = joint
        self.lam = lam
        self.kind = "joint-life status" if joint else "last-survivor status"
        self.limiting_age = math.inf
        self.max_age = math.inf

    # ---- lives ---------------------------------------------------------------------------------

    def _lives(self, age, duration):
        age = np.asarray(age, float)
        if age.ndim == 1:
            age = age[None, :]
        duration = np.broadcast_to(np.asarray(duration, float), age.shape)
        return age, duration

    @staticmethod
    def _columns(age, duration):
        age = np.asarray(age, float)
        if age.ndim == 1:
            age = age[None, :]
        duration = np.broadcast_to(np.asarray(duration, float), age.shape)
        return age[:, None, :], duration[:, None, :]

    def place_lives(self, age, duration, rule="last-birthday"):
        """Each member's age and duration placed by its own basis (see LifetimeModel)."""
        age, duration = self._lives(age, duration)
        if age.shape[1] != self.n_members:
            return age, duration
        placed = [m.place_lives(age[:, i], duration[:, i], rule) for i, m in enumerate(self.members)]
        return (
            np.stack([np.broadcast_to(a, age.shape[:1]) for a, _ in placed], axis=1),
            np.stack([np.broadcast_to(d, age.shape[:1]) for _, d in placed], axis=1),
        )

    def check_lives(self, age, duration) -> None:
        age, duration = self._lives(age, duration)
        if age.shape[1] != self.n_members:
            raise DomainError(
                "lives", f"each life needs {self.n_members} ages, one per member"
            )
        for i, member in enumerate(self.members):
            try:
                member.check_lives(age[:, i], duration[:, i])
            except DomainError as exc:
                field = exc.field
                for name, plural in ((".age", ".ages"), (".duration", ".durations")):
                    if field.endswith(name):
                        field = field[: -len(name)] + f"{plural}[{i}]"
                raise DomainError(field, f"member {i}: {exc.message}") from None

    # ---- primitives ------------------------------------------------------------------------------

    def _member_hazards(self, age, duration, t0, t1):
        """Hᵢ between t0 and t1 for each member: a list of arrays."""
        out = []
        with np.errstate(over="ignore", invalid="ignore"):
            for i, member in enumerate(self.members):
                h = member.span_hazard(age[..., i], duration[..., i], t0, t1)
                out.append(np.where(np.isnan(h), np.inf, h))
        return out

    def _log_dead(self, age, duration, t):
        """Σᵢ log ₜqᵢ (log of the probability that every member has died by t)."""
        total = 0.0
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for h in self._member_hazards(age, duration, np.zeros_like(t), t):
                # log ₜq = log(1 − e^(−H)): log1p(−e^(−H)) when e^(−H) is small, else the
                # logarithm of −expm1(−H), so that neither loses digits
                small = h > math.log(2.0)
                total = total + np.where(small, np.log1p(-np.exp(-h)), np.log(-np.expm1(-h)))
        return total

    def _ls_hazard(self, age, duration, t):
        """−log(1 − Π ₜqᵢ) for lives (N, m) at durations t (T,): (N, T)."""
        a, d = self._columns(age, duration)
        tt = np.asarray(t, float)[None, :]
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return -np.log(-np.expm1(self._log_dead(a, d, tt)))

    def span_hazard(self, age, duration, t0, t1):
        age = np.asarray(age, float)
        duration = np.asarray(duration, float)
        t0 = np.asarray(t0, float)
        t1 = np.asarray(t1, float)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            if self.joint:
                out = sum(self._member_hazards(age, duration, t0, t1))
            else:
                # H(t) = λt − log(1 − Π ₜqᵢ)
                def status(t):
                    return -np.log(-np.expm1(self._log_dead(age, duration, t)))

                h0 = np.where(t0 > 0.0, status(t0), 0.0)
                out = status(t1) - h0
            out = out + self.lam * np.maximum(t1 - t0, 0.0)
        out = np.where(np.isnan(out), np.inf, out)
        return np.where(t1 <= t0, 0.0, out)

    def force(self, age, duration, t):
        age, duration = self._lives(age, duration)
        t = as_float_array(t)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            if self.joint:
                mu = self.lam + sum(
                    m.force(age[:, i], duration[:, i], t) for i, m in enumerate(self.members)
                )
            else:
                dens = [m.density(age[:, i], duration[:, i], t) for i, m in enumerate(self.members)]
                dead = [m.death(age[:, i], duration[:, i], t) for i, m in enumerate(self.members)]
                all_dead = np.prod(dead, axis=0)
                alive = np.exp(-self._ls_hazard(age, duration, t))  # 1 − Π qᵢ
                numer = 0.0
                for i in range(self.n_members):
                    others = np.prod([dead[j] for j in range(self.n_members) if j != i], axis=0)
                    numer = numer + dens[i] * others
                mu = self.lam + numer / alive
                mu = np.where(all_dead >= 1.0, np.nan, mu)
            h = self.cumulative_hazard(age, duration, t)
        return np.where(np.isfinite(mu) & np.isfinite(h), mu, np.nan)

    def kink_phases(self, age, duration):
        age, duration = self._lives(age, duration)
        return np.stack(
            [m.kink_phase(age[:, i], duration[:, i]) for i, m in enumerate(self.members)], axis=1
        )

    def kink_phase(self, age, duration):
        return self.kink_phases(age, duration).min(axis=1)

    def horizon(self, age, duration):
        age, duration = self._lives(age, duration)
        each = np.stack(
            [m.horizon(age[:, i], duration[:, i]) for i, m in enumerate(self.members)], axis=1
        )
        out = each.min(axis=1) if self.joint else each.max(axis=1)
        if self.lam > 0.0:
            out = np.minimum(out, NEGLIGIBLE_HAZARD / self.lam)
        return np.minimum(out, MAX_HORIZON)

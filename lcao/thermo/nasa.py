"""NASA polynomials fitted to statistical Cp, with Cp, H and S continuous at the common temperature.

Seven-coefficient form (McBride, Gordon & Reno, NASA TM-4513, 1993):
  Cp/R = a1 + a2 T + a3 T^2 + a4 T^3 + a5 T^4
  H/RT = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T
  S/R  = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7
Nine-coefficient form (McBride, Zehe & Gordon, NASA/TP-2002-211556):
  Cp/R = a1 T^-2 + a2 T^-1 + a3 + a4 T + a5 T^2 + a6 T^3 + a7 T^4
  H/RT = -a1 T^-2 + a2 ln(T)/T + a3 + a4 T/2 + a5 T^2/3 + a6 T^3/4 + a7 T^4/5 + b1/T
  S/R  = -a1 T^-2/2 - a2 T^-1 + a3 ln T + a4 T + a5 T^2/2 + a6 T^3/3 + a7 T^4/4 + b2

The Cp coefficients of both ranges are fitted together by least squares in
relative error with Cp equal at the common temperature (a Lagrange
constraint); the low range's integration constants fix H(298.15 K) to the
standard enthalpy of formation and S(298.15 K) to the statistical value,
and the high range's are set so that H and S are continuous.

Every coefficient is rounded to the nine significant digits that the
fixed-column layout holds (E15.8) before the next constant is computed from
it, so the kinetics files carry exactly the polynomials lcao evaluates.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .statistical import R, T_REF

FORMS = {
    # Cp/R basis, its H/RT integral (without the constant), its S/R integral (without the constant)
    "nasa7": (
        lambda t: np.stack([np.ones_like(t), t, t**2, t**3, t**4], axis=-1),
        lambda t: np.stack([np.ones_like(t), t / 2, t**2 / 3, t**3 / 4, t**4 / 5], axis=-1),
        lambda t: np.stack([np.log(t), t, t**2 / 2, t**3 / 3, t**4 / 4], axis=-1),
    ),
    "nasa9": (
        lambda t: np.stack([t**-2, 1 / t, np.ones_like(t), t, t**2, t**3, t**4], axis=-1),
        lambda t: np.stack([-(t**-2), np.log(t) / t, np.ones_like(t), t / 2, t**2 / 3, t**3 / 4, t**4 / 5], axis=-1),
        lambda t: np.stack([-(t**-2) / 2, -1 / t, np.log(t), t, t**2 / 2, t**3 / 3, t**4 / 4], axis=-1),
    ),
}


@dataclass(frozen=True)
class NasaRange:
    t_low: float
    t_high: float
    cp_coeffs: tuple  # a1..a5 (nasa7) or a1..a7 (nasa9)
    h_constant: float  # a6 (nasa7) or b1 (nasa9), in K
    s_constant: float  # a7 (nasa7) or b2 (nasa9)
    max_rel_cp_residual: float


@dataclass(frozen=True)
class NasaFit:
    form: str
    ranges: tuple[NasaRange, NasaRange]
    t_common: float
    dhf298_kj_per_mol: float
    reference_pressure_pa: float = 1e5

    def _range(self, t):
        return self.ranges[0] if t <= self.t_common else self.ranges[1]

    def cp(self, t):
        """Cp in J/(mol K) at scalar or array T."""
        return self._eval(t, 0)

    def h(self, t):
        """H in J/mol (H(298.15) = the standard enthalpy of formation)."""
        return self._eval(t, 1)

    def s(self, t):
        """S in J/(mol K)."""
        return self._eval(t, 2)

    def _eval(self, t, which, rng=None):
        t = np.asarray(t, float)
        out = np.empty_like(t)
        for k, r in enumerate(self.ranges):
            mask = (t <= self.t_common) if k == 0 else (t > self.t_common)
            if rng is not None:
                mask = np.ones_like(t, bool) if rng == k else np.zeros_like(t, bool)
            if not mask.any():
                continue
            out[mask] = _value(self.form, r, t[mask], which)
        return out

    def at_common(self) -> dict:
        """Cp, H, S from each range at the common temperature (for the continuity check)."""
        tc = np.array([self.t_common])
        return {name: (float(_value(self.form, self.ranges[0], tc, w)[0]), float(_value(self.form, self.ranges[1], tc, w)[0]))
                for w, name in enumerate(("cp", "h", "s"))}

    def as_dict(self) -> dict:
        names7 = ["a1", "a2", "a3", "a4", "a5"]
        names9 = ["a1", "a2", "a3", "a4", "a5", "a6", "a7"]
        hname, sname = ("a6", "a7") if self.form == "nasa7" else ("b1", "b2")
        return {
            "form": self.form,
            "reference": "McBride, Gordon & Reno, NASA TM-4513 (1993)" if self.form == "nasa7" else "McBride, Zehe & Gordon, NASA/TP-2002-211556",
            "t_common_k": self.t_common,
            "dhf298_kj_per_mol": self.dhf298_kj_per_mol,
            "reference_pressure_pa": self.reference_pressure_pa,
            "ranges": [
                {
                    "t_low_k": r.t_low,
                    "t_high_k": r.t_high,
                    **dict(zip(names7 if self.form == "nasa7" else names9, r.cp_coeffs)),
                    hname: r.h_constant,
                    sname: r.s_constant,
                    "max_relative_cp_residual": r.max_rel_cp_residual,
                }
                for r in self.ranges
            ],
        }


def _value(form, r: NasaRange, t, which):
    cp_b, h_b, s_b = FORMS[form]
    a = np.asarray(r.cp_coeffs)
    if which == 0:
        return R * cp_b(t) @ a
    if which == 1:
        return R * t * (h_b(t) @ a + r.h_constant / t)
    return R * (s_b(t) @ a + r.s_constant)


def published(x: float) -> float:
    """``x`` rounded to the nine significant digits of the fixed-column layout."""
    return float(f"{x:.8E}")


def at_reference_pressure(fit: NasaFit, pressure_pa: float) -> NasaFit:
    """The same polynomials for a standard state at ``pressure_pa`` instead of 1 bar: only the entropy
    constant changes, by -ln(p/1 bar) (ideal gas), so S and G move by R ln(p/1 bar) and Cp, H do not."""
    from dataclasses import replace

    shift = np.log(pressure_pa / 1e5)
    return replace(fit, reference_pressure_pa=float(pressure_pa), ranges=tuple(replace(r, s_constant=published(r.s_constant - shift)) for r in fit.ranges))


def fit_nasa(t_table, cp_table, s298: float, dhf298_kj_per_mol: float, t_low=200.0, t_common=1000.0, t_high=6000.0, form="nasa7") -> NasaFit:
    """Fit two ranges to statistical Cp(T) (J/(mol K)) with continuity at ``t_common``.

    Args:
        t_table, cp_table: statistical Cp on a temperature grid covering [t_low, t_high].
        s298: statistical S(298.15 K), J/(mol K).
        dhf298_kj_per_mol: standard enthalpy of formation at 298.15 K.
    """
    if form not in FORMS:
        raise ValueError(f"unknown polynomial form {form!r}; allowed: {', '.join(FORMS)}")
    t = np.asarray(t_table, float)
    cp = np.asarray(cp_table, float) / R
    cp_b, h_b, s_b = FORMS[form]
    n = cp_b(np.array([1.0])).shape[-1]
    lo = (t >= t_low) & (t <= t_common)
    hi = (t >= t_common) & (t <= t_high)
    # scale T to keep the normal equations well conditioned: fit in x = T / 1000
    blocks = []
    rhs = []
    for mask, k in ((lo, 0), (hi, 1)):
        b = cp_b(t[mask]) / cp[mask][:, None]
        row = np.zeros((mask.sum(), 2 * n))
        row[:, k * n : (k + 1) * n] = b
        blocks.append(row)
        rhs.append(np.ones(mask.sum()))
    A = np.vstack(blocks)
    y = np.concatenate(rhs)
    scale = np.linalg.norm(A, axis=0)
    scale[scale == 0] = 1.0
    As = A / scale
    # constraint: Cp_low(tc) = Cp_high(tc), and dCp/dT equal too for a smooth join
    tc = np.array([float(t_common)])
    c0 = np.concatenate([cp_b(tc)[0], -cp_b(tc)[0]]) / scale
    eps = 1e-3
    d1 = (cp_b(tc + eps)[0] - cp_b(tc - eps)[0]) / (2 * eps)
    c1 = np.concatenate([d1, -d1]) / scale
    C = np.vstack([c0, c1])
    kkt = np.block([[As.T @ As, C.T], [C, np.zeros((2, 2))]])
    sol = np.linalg.solve(kkt, np.concatenate([As.T @ y, np.zeros(2)]))
    x = np.array([published(v) for v in sol[: 2 * n] / scale])
    a_lo, a_hi = x[:n], x[n:]
    # integration constants
    t298 = np.array([T_REF])
    h298 = dhf298_kj_per_mol * 1000.0
    h_lo = published(h298 / R - T_REF * (h_b(t298)[0] @ a_lo))
    s_lo = published(s298 / R - s_b(t298)[0] @ a_lo)
    h_c = tc[0] * (h_b(tc)[0] @ a_lo) + h_lo
    s_c = s_b(tc)[0] @ a_lo + s_lo
    h_hi = published(h_c - tc[0] * (h_b(tc)[0] @ a_hi))
    s_hi = published(s_c - s_b(tc)[0] @ a_hi)

    def resid(a, mask):
        return float(np.max(np.abs(cp_b(t[mask]) @ a / cp[mask] - 1.0))) if mask.any() else 0.0

    r_lo = NasaRange(float(t_low), float(t_common), tuple(map(float, a_lo)), float(h_lo), float(s_lo), resid(a_lo, lo))
    r_hi = NasaRange(float(t_common), float(t_high), tuple(map(float, a_hi)), float(h_hi), float(s_hi), resid(a_hi, hi))
    return NasaFit(form, (r_lo, r_hi), float(t_common), float(dhf298_kj_per_mol))

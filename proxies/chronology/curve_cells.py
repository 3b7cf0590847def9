"""The ``curve`` cell of a date: one listed curve, or a blend of two with an uncertain share.

Syntax (ours)::

    atmosphere                       one curve named in [curves]
    blend:atmosphere:marine:0.3      30 % of the carbon from 'marine', the rest from 'atmosphere'
    blend:atmosphere:marine:0.3:0.1  the same share with a 1-sigma uncertainty of 0.1

The blended curve is :func:`proxies.chronology.curves.blend_curves` (common practice for a
lake with a marine carbon share or a hard-water effect). With an uncertain share the date's
likelihood is averaged over the share, a normal truncated to [0, 1], by Gauss-Hermite
quadrature (:data:`SHARE_NODES` points).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CurveChoice", "BLEND_PREFIX", "SHARE_NODES", "parse_curve_cell", "curve_cell_problem",
           "share_quadrature"]

BLEND_PREFIX = "blend:"
#: quadrature points over an uncertain share
SHARE_NODES = 7
_FIX = ("write a curve name from [curves], or blend:BASE:ADMIXTURE:SHARE[:SHARE_SD] with two names "
        "from [curves], a share in [0, 1] and an optional 1-sigma share uncertainty >= 0 "
        "(e.g. blend:atmosphere:marine:0.3:0.1)")


@dataclass(frozen=True)
class CurveChoice:
    """What a date's curve cell asks for.

    Attributes
    ----------
    base : str
        The curve of the main carbon source.
    admixture : str or None
        The curve of the admixed source (``None``: no blend).
    share, share_sd : float
        Fraction of carbon from ``admixture`` and its 1-sigma uncertainty.
    """

    base: str
    admixture: str | None = None
    share: float = 0.0
    share_sd: float = 0.0

    @property
    def names(self) -> tuple[str, ...]:
        return (self.base,) if self.admixture is None else (self.base, self.admixture)

    @property
    def key(self) -> str:
        """A canonical text of the choice (dates with the same key are calibrated together)."""
        if self.admixture is None:
            return self.base
        return f"{BLEND_PREFIX}{self.base}:{self.admixture}:{self.share:g}:{self.share_sd:g}"


def parse_curve_cell(cell: str) -> CurveChoice:
    """Parse a non-empty curve cell; ``ValueError`` with what is wrong (see :data:`_FIX`)."""
    text = str(cell).strip()
    if not text.lower().startswith(BLEND_PREFIX):
        return CurveChoice(text)
    parts = [p.strip() for p in text[len(BLEND_PREFIX):].split(":")]
    if len(parts) not in (3, 4) or not parts[0] or not parts[1]:
        raise ValueError(f"malformed blend {text!r}: expected blend:BASE:ADMIXTURE:SHARE[:SHARE_SD]")
    try:
        share = float(parts[2])
        share_sd = float(parts[3]) if len(parts) == 4 else 0.0
    except ValueError:
        raise ValueError(f"malformed blend {text!r}: the share and its uncertainty must be numbers") from None
    if not 0.0 <= share <= 1.0 or not (share_sd >= 0.0 and np.isfinite(share_sd)):
        raise ValueError(f"blend {text!r}: the share must be in [0, 1] and its uncertainty >= 0")
    if parts[0] == parts[1]:
        raise ValueError(f"blend {text!r} names the same curve twice")
    return CurveChoice(parts[0], parts[1], share, share_sd)


def curve_cell_problem(cell: str, known) -> tuple[str, str] | None:
    """(message, fix) when a curve cell is malformed or names a curve not in ``known``."""
    try:
        choice = parse_curve_cell(cell)
    except ValueError as error:
        return str(error), _FIX
    missing = [n for n in choice.names if n not in known]
    if missing:
        listed = ", ".join(sorted(known)) or "(none)"
        return (f"unknown curve {missing[0]!r}" + (f" in {str(cell).strip()!r}" if choice.admixture else ""),
                f"use a curve named in the run config [curves]: {listed}")
    return None


def share_quadrature(share: float, share_sd: float) -> tuple[np.ndarray, np.ndarray]:
    """Shares and weights averaging over N(share, share_sd) truncated to [0, 1].

    Gauss-Hermite nodes of the normal, clipped into [0, 1] (the truncated tails pile up on
    the bounds, i.e. a censored normal); a single node when ``share_sd`` is 0.
    """
    from scipy import stats  # imported here: checking a curve cell needs no scipy.stats

    if share_sd == 0:
        return np.array([share]), np.array([1.0])
    x, w = np.polynomial.hermite_e.hermegauss(SHARE_NODES)
    shares = share + share_sd * x
    weights = w / w.sum()
    if np.any((shares < 0) | (shares > 1)):
        # keep the probability of each side's tail on its bound
        inside = (shares >= 0) & (shares <= 1)
        below = stats.norm.cdf(-share / share_sd)
        above = stats.norm.sf((1 - share) / share_sd)
        shares, weights = shares[inside], weights[inside] / weights[inside].sum() * (1 - below - above)
        shares = np.concatenate([shares, [0.0, 1.0]])
        weights = np.concatenate([weights, [below, above]])
    return shares, weights

"""The Gumbel tail of the null maxima (p-values below 1 / (n_surrogates + 1), which archive-wide
FDR control needs) checked against a long run of red-noise surrogates (our own simulation)."""

from __future__ import annotations

import numpy as np

from proxies.events.candidates import EXCURSION, SHIFT
from proxies.events.significance import gumbel_tail, null_maxima


def test_gumbel_tail_of_200_surrogates_matches_4000_surrogates_in_the_far_tail():
    """Null maxima of both statistics on AR(1) red noise (200 points, tau 2 grid steps, the
    default 40-point background): a tail fitted to 200 surrogate maxima must give, at the
    statistic that 4,000 surrogates exceed with probability 0.01 and 0.0025, a p-value no smaller
    than half of those (never much too small: the tail must not invent significance) and at
    most 4 times larger (measured: the MOSUM maxima have a slightly lighter tail than Gumbel,
    p 0.0094 for 0.0025, so the tail errs on the safe side)."""
    rng = np.random.default_rng(41)
    long = null_maxima(200, 2.0, 4000, 12, 5, rng, background_points=40, shift_window_points=20)
    short = null_maxima(200, 2.0, 200, 12, 5, rng, background_points=40, shift_window_points=20)
    for kind in (SHIFT, EXCURSION):
        for level in (0.01, 0.0025):
            z = np.quantile(long[kind], 1 - level)
            p = gumbel_tail(np.array([z]), short[kind])[0]
            assert level / 2 <= p <= level * 4, (kind, level, p)

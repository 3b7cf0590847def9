"""Abrupt-event detection on every ensemble member.

- :mod:`~proxies.events.ramp` -- ramp regression (Mudelsee 2000);
- :mod:`~proxies.events.changepoints` -- change points in mean and slope (PELT / optimal partitioning);
- :mod:`~proxies.events.persistence` -- AR(1) persistence of uneven series and surrogates (Mudelsee 2002);
- :mod:`~proxies.events.scan` -- scan statistic for excursions (departure and return);
- :mod:`~proxies.events.candidates` -- shift and excursion candidates of each member;
- :mod:`~proxies.events.significance` -- red-noise null distributions (whole record, local) and p-values;
- :mod:`~proxies.events.stage` -- :func:`detect_core_events`, the stage function.
"""

from proxies._lazy import lazy_exports

#: module -> the public names it gives (each imported on first use)
__getattr__, __dir__, __all__ = lazy_exports(__name__, {
    ".settings": "EventSettings",
    ".stage": "EVENT_COLUMNS EventResult detect_core_events detect_series_events",
})

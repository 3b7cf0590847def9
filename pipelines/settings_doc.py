"""The README's tables of run-config keys, generated from the settings declarations.

Each table sits between ``<!-- keys:SECTION -->`` and ``<!-- /keys -->`` in README.md; a test
checks that they equal what :func:`key_table` makes from the declarations, and
``python -m pipelines.settings_doc README.md`` rewrites them after a key is added or changed.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from proxies.settings_spec import settings_rows

__all__ = ["SECTIONS", "key_table", "refresh_readme"]


def _sections() -> dict:
    from pipelines.config import RunSettings
    from proxies.calibration.settings import METHOD_SETTINGS, ProxyCalibration
    from proxies.calibration.training_settings import InstrumentalSpec, TrainingSpec
    from proxies.chronology.settings import ChronologySettings
    from proxies.events.settings import EventSettings
    from proxies.reconstruction.series_settings import SeriesSettings
    from proxies.reconstruction.settings import ReconstructionSettings
    return {"series": SeriesSettings, "run": RunSettings, "chronology": ChronologySettings,
            "reconstruction": ReconstructionSettings, "events": EventSettings,
            "training": TrainingSpec, "instrumental": InstrumentalSpec,
            "calibration": ProxyCalibration,
            **{f"calibration.{name}": cls for name, cls in METHOD_SETTINGS.items()}}


#: section name -> settings class (import on demand; see :func:`_sections`); a
#: ``calibration.<method>`` table lists the keys of that method beyond the shared ones
SECTIONS = ("run", "chronology", "reconstruction", "events", "training", "instrumental",
            "calibration", "calibration.equation", "calibration.linear",
            "calibration.exponential", "calibration.overlap", "calibration.transfer",
            "calibration.stated", "series")
#: how a section is named in its table's header
_TITLES = {"series": "[series.<name>]", "training": "[training.<name>]", "instrumental": "[instrumental.<name>]",
           "calibration": "[calibration.<proxy column>]"}

_BLOCK = re.compile(r"(<!-- keys:(?P<name>[\w.]+) -->\n)(?P<body>.*?)(<!-- /keys -->)", re.S)


def key_table(section: str) -> str:
    """The Markdown table of one section's keys: key, default, allowed values, meaning."""
    classes = _sections()
    cls = classes[section]
    title = _TITLES.get(section, f"[{section}]")
    shared: set[str] = set()
    if section.startswith("calibration."):
        method = section.split(".", 1)[1]
        title = f'method = "{method}"'
        shared = {row["key"] for row in settings_rows(classes["calibration"])}
    lines = [f"| `{title}` key | default | allowed | meaning |", "|---|---|---|---|"]
    for row in settings_rows(cls):
        if row["key"] in shared:
            continue
        allowed = row["allowed"].replace("|", "\\|")
        lines.append(f"| `{row['key']}` | `{row['default']}` | {allowed} | {row['doc']} |")
    return "\n".join(lines) + "\n"


def refresh_readme(text: str) -> str:
    """``text`` with every marked key table regenerated."""
    return _BLOCK.sub(lambda m: m.group(1) + key_table(m.group("name")) + m.group(4), text)


if __name__ == "__main__":  # pragma: no cover - a maintenance command
    path = Path(sys.argv[1] if len(sys.argv) > 1 else "README.md")
    path.write_text(refresh_readme(path.read_text(encoding="utf-8")), encoding="utf-8")

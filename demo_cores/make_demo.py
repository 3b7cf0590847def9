"""Generate the invented downcore demo scenario from a known true climate history.

Everything written by this script is INVENTED: the Skerravine Islands, their lakes, the
Telvanic Sea, the weather station, every core, every date and the radiocarbon calibration
curve. The invented curve must never be used to date real samples.

The script builds, in order,

1. a true regional climate (summer air temperature and sea-surface temperature, one value per
   year from 14,000 cal BP to 2019 CE = -69 cal BP) with a slow trend, centennial variability,
   one abrupt cold event and an instrumental-era warming;
2. an invented atmospheric radiocarbon curve in the published five-column layout, and an
   invented marine curve (atmosphere smoothed, plus a ~400-yr reservoir age);
3. four cores with known true age-depth relations, forward-modelled proxies and simulated dates:
   ULLA-1 (varved lake, midge counts, two sections, a turbidite), TEL-07 (marine, Mg/Ca and
   UK'37, Excel samples table), CORV-3 (annually laminated lake, biogenic silica, depths in
   mm) and TEL-12 (marine, TEX86, a hiatus, Parquet samples and TSV dates);
4. a modern midge training set of 140 invented lakes;
5. an instrumental summer air-temperature series 1850-2019 CE;

and writes the truth beside the data in ``truth/``. Parts 1-2 live in ``demo_truth.py``,
parts 3-5 in ``demo_records.py`` (beside this script); this script writes the files. All
randomness comes from ``proxies.seeding.rng_for(DEMO_SEED, <part>, ...)`` so each part has its
own stream; running the script twice gives byte-identical files.

Usage::

    python demo_cores/make_demo.py            # regenerate in demo_cores/
    python demo_cores/make_demo.py OUT_DIR    # write the scenario somewhere else

Forward models (coefficients from memory of the papers; see demo_cores/README.md)
--------------------------------------------------------------------------------
- Radiocarbon: conventional age t = -8033 ln(F14C); Delta14C = 1000 (F14C exp(cal BP/8267) - 1)
  (Stuiver & Polach 1977, Radiocarbon 19:355, doi:10.1017/S0033822200003672).
- Mg/Ca = 0.38 exp(0.090 T) [mmol/mol] (Anand, Elderfield & Conte 2003, Paleoceanography
  18:1050, doi:10.1029/2002PA000846).
- UK'37 = 0.033 T + 0.044 (Mueller et al. 1998, Geochim. Cosmochim. Acta 62:1757,
  doi:10.1016/S0016-7037(98)00097-0).
- SST = 68.4 log10(TEX86) + 38.6 (Kim et al. 2010, Geochim. Cosmochim. Acta 74:4639,
  doi:10.1016/j.gca.2010.05.027).
- Midge abundances: Gaussian response curves on July air temperature (ter Braak & Looman 1986,
  Vegetatio 65:3, doi:10.1007/BF00032121), lognormal ecological noise, multinomial counting.
- Biogenic silica: an invented linear response, ``bsi_percent = 2.5 T - 10``.
"""

from __future__ import annotations

import datetime
import io
import pathlib
import re
import sys
import zipfile

import pandas as pd

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))  # its two part modules beside it
from demo_records import (BSI_ERROR, BSI_INTERCEPT, BSI_NOISE_SD, BSI_SLOPE, ECOLOGICAL_NOISE_SD,
                          MGCA_A, MGCA_B, MGCA_RELATIVE_ERROR, NONCLIMATE_SD_C, RESERVOIR_ERROR,
                          RESERVOIR_OFFSET, STATION_NOISE_SD, TEL12_AGE_DEPTH, TEX86_ERROR,
                          TEX86_INTERCEPT, TEX86_SLOPE, TRAINING_TEMPERATURE_SD, UK37_ERROR,
                          UK37_INTERCEPT, UK37_SLOPE, ULLA_AGE_DEPTH, ULLA_SECTION_B_TOP_CM,
                          make_corv, make_station, make_tel07, make_tel12, make_training,
                          make_ulla, midge_responses)  # noqa: E402
from demo_truth import (AIR_CENTENNIAL_SD, AIR_WEATHER_SD, CENTENNIAL_SMOOTHING_YR, COLLECTED_CE,
                        CORE_IDS, DEMO_SEED, EVENT, INVENTED_NOTE, SST_CENTENNIAL_SD,
                        SST_WEATHER_SD, _curve_text, event_shape, invented_curves,
                        invented_delta14c, true_climate, window_mean)  # noqa: E402

__all__ = ["DEMO_SEED", "main", "true_climate", "invented_curves", "CORE_IDS", "event_shape",
           "invented_delta14c", "window_mean"]

# ---------------------------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------------------------

_FIXED_TIME = datetime.datetime(2019, 8, 15, 0, 0, 0)


def _write_text(path: pathlib.Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(text.encode("utf-8"))


def _write_csv(path: pathlib.Path, table: pd.DataFrame, sep: str = ",") -> None:
    _write_text(path, table.to_csv(index=False, sep=sep, lineterminator="\n"))


def _write_xlsx(path: pathlib.Path, table: pd.DataFrame, sheet: str) -> None:
    """Excel workbook with fixed document times and zip-entry times, so bytes repeat."""
    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        table.to_excel(writer, index=False, sheet_name=sheet)
        properties = writer.book.properties
        properties.creator = "downcore demo (invented data)"
        properties.created = properties.modified = _FIXED_TIME
    repacked = io.BytesIO()
    with zipfile.ZipFile(buffer) as source, zipfile.ZipFile(repacked, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            entry = zipfile.ZipInfo(info.filename, date_time=(2019, 8, 15, 0, 0, 0))
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            data = source.read(info.filename)
            if info.filename == "docProps/core.xml":  # openpyxl stamps the save time here
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)",
                              rb"\g<1>2019-08-15T00:00:00Z\g<2>", data)
            target.writestr(entry, data)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(repacked.getvalue())


def _write_parquet(path: pathlib.Path, table: pd.DataFrame) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    table.to_parquet(path, index=False, engine="pyarrow", compression="snappy")


def _toml_value(value) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(round(value, 6))
    return str(value)


def _toml(comment: str, tables: list[tuple[str, dict]]) -> str:
    """Minimal TOML writer: ``[name]`` for a table, ``[[name]]`` when the name is given so."""
    lines = [f"# {line}" if line else "#" for line in comment.splitlines()]
    for name, mapping in tables:
        lines.append("")
        lines.append(name)
        lines.extend(f"{key} = {_toml_value(value)}" for key, value in mapping.items())
    return "\n".join(lines) + "\n"


CORE_SITES = {
    "ULLA-1": dict(archive="lake", latitude=61.482, longitude=-27.315,
                   site="Lake Ullamere, Skerravine Islands (invented site; varved lake)"),
    "TEL-07": dict(archive="marine", latitude=60.875, longitude=-29.040,
                   site="Telvanic Sea, southern slope, 1140 m water depth (invented site)"),
    "CORV-3": dict(archive="lake", latitude=61.737, longitude=-27.902,
                   site="Lake Corvallen, Skerravine Islands (invented site; annual laminations)"),
    "TEL-12": dict(archive="marine", latitude=60.214, longitude=-30.660,
                   site="Telvanic Sea, outer shelf basin, 410 m water depth (invented site)"),
}


def _core_toml(core_id: str, files: dict, depth_unit: str = "cm", extra_core: dict | None = None,
               sections=(), event_layers=(), hiatuses=()) -> str:
    core = {"id": core_id, **{k: CORE_SITES[core_id][k] for k in ("archive", "latitude", "longitude")},
            "collected": COLLECTED_CE, "depth_unit": depth_unit, "site": CORE_SITES[core_id]["site"]}
    core.update(extra_core or {})
    tables = [("[core]", core), ("[files]", files)]
    tables += [("[[sections]]", {"name": n, "top": float(t)}) for n, t in sections]
    tables += [("[[event_layers]]", {"top": float(t), "bottom": float(b), "kind": k}) for t, b, k in event_layers]
    tables += [("[[hiatuses]]", {"depth": float(d)}) for d in hiatuses]
    comment = (f"Demo core {core_id}: INVENTED data ({INVENTED_NOTE}).\n"
               "Generated by demo_cores/make_demo.py; the true ages and climate are in demo_cores/truth/.")
    return _toml(comment, tables)


def _event_toml() -> str:
    comment = ("The true abrupt cold event of the INVENTED demo climate (demo_cores/truth/climate.csv).\n"
               "Ages in cal BP (older = larger). The cooling starts at onset_cal_bp, the full cold is\n"
               "reached at cold_start_cal_bp, recovery starts at recovery_start_cal_bp and ends at end_cal_bp.\n"
               "Amplitudes are the full-cold departure from the climate without the event [degC];\n"
               "duration_yr = onset - end (whole event), cold_phase_yr = cold_start - recovery_start.")
    e = EVENT
    event = {
        "onset_cal_bp": e["onset_cal_bp"], "cold_start_cal_bp": e["cold_start_cal_bp"],
        "recovery_start_cal_bp": e["recovery_start_cal_bp"], "end_cal_bp": e["end_cal_bp"],
        "onset_year_ce": 1950.0 - e["onset_cal_bp"],
        "duration_yr": e["onset_cal_bp"] - e["end_cal_bp"],
        "cooling_yr": e["onset_cal_bp"] - e["cold_start_cal_bp"],
        "cold_phase_yr": e["cold_start_cal_bp"] - e["recovery_start_cal_bp"],
        "recovery_yr": e["recovery_start_cal_bp"] - e["end_cal_bp"],
        "air_temp_amplitude_c": e["air_temp_amplitude_c"], "sst_amplitude_c": e["sst_amplitude_c"],
    }
    return _toml(comment, [("[event]", event)])


def _forward_toml(responses_file: str) -> str:
    comment = ("Forward models and noise levels used by demo_cores/make_demo.py for the INVENTED demo.\n"
               "Temperatures in degC; every 1-sigma noise is Gaussian unless said otherwise.")
    tables = [
        ("[climate]", {"air_weather_sd_c": AIR_WEATHER_SD, "sst_weather_sd_c": SST_WEATHER_SD,
                       "air_centennial_sd_c": AIR_CENTENNIAL_SD, "sst_centennial_sd_c": SST_CENTENNIAL_SD,
                       "centennial_smoothing_yr": CENTENNIAL_SMOOTHING_YR}),
        ("[mgca_mmol_mol]", {"equation": "Mg/Ca = 0.38 exp(0.090 T) (Anand et al. 2003)", "a": MGCA_A, "b": MGCA_B,
                             "analytical_relative_sd": MGCA_RELATIVE_ERROR,
                             "nonclimate_sd_c": NONCLIMATE_SD_C["mgca_mmol_mol"], "variable": "sst_c"}),
        ("[uk37]", {"equation": "UK'37 = 0.033 T + 0.044 (Mueller et al. 1998)", "slope": UK37_SLOPE,
                    "intercept": UK37_INTERCEPT, "analytical_sd": UK37_ERROR,
                    "nonclimate_sd_c": NONCLIMATE_SD_C["uk37"], "variable": "sst_c"}),
        ("[tex86]", {"equation": "SST = 68.4 log10(TEX86) + 38.6 (Kim et al. 2010)", "slope": TEX86_SLOPE,
                     "intercept": TEX86_INTERCEPT, "analytical_sd": TEX86_ERROR,
                     "nonclimate_sd_c": NONCLIMATE_SD_C["tex86"], "variable": "sst_c"}),
        ("[bsi_percent]", {"equation": "bsi_percent = 2.5 T - 10 (invented)", "intercept": BSI_INTERCEPT,
                           "slope": BSI_SLOPE, "nonclimate_sd": BSI_NOISE_SD, "analytical_sd": BSI_ERROR,
                           "variable": "air_temp_c"}),
        ("[midges]", {"model": "Gaussian response on July air temperature, lognormal noise, multinomial counts",
                      "responses_file": responses_file, "ecological_lognormal_sd": ECOLOGICAL_NOISE_SD,
                      "head_capsules_min": 150, "head_capsules_max": 300,
                      "training_values": "percent of the head capsules counted",
                      "training_temperature_sd_c": TRAINING_TEMPERATURE_SD, "variable": "air_temp_c"}),
        ("[radiocarbon]", {"reservoir_offset_mean": RESERVOIR_OFFSET, "reservoir_offset_sd": RESERVOIR_ERROR,
                           "ulla1_outlier_shift_14c_yr": 850.0, "tel07_excluded_shift_14c_yr": 620.0,
                           "note": "each date: curve mean + N(0, curve sigma) + offset + N(0, lab error)"}),
        ("[station]", {"noise_sd_c": STATION_NOISE_SD, "missing_years": "1917, 1918"}),
    ]
    return _toml(comment, tables)


def main(out_dir) -> list[pathlib.Path]:
    """Write the whole invented scenario under ``out_dir``.

    Parameters
    ----------
    out_dir : str or path-like
        Target folder (created if needed). Existing files of the same names are replaced;
        nothing else is touched.

    Returns
    -------
    list of pathlib.Path
        The files written, relative to ``out_dir``, in writing order.
    """
    out = pathlib.Path(out_dir)
    written: list[pathlib.Path] = []

    def text(rel: str, content: str) -> None:
        _write_text(out / rel, content)
        written.append(pathlib.Path(rel))

    def csv(rel: str, table: pd.DataFrame, sep: str = ",") -> None:
        _write_csv(out / rel, table, sep)
        written.append(pathlib.Path(rel))

    climate = true_climate()
    atmosphere, marine = invented_curves()
    responses = midge_responses()

    text("curves/invented_atmosphere.14c", _curve_text(
        atmosphere, "ATMOSPHERIC", "Delta14C: invented slow decline from +150 permil at 20 ka to 0, plus wiggles."))
    text("curves/invented_marine.14c", _curve_text(
        marine, "MARINE", "Marine = invented atmosphere smoothed (60-yr Gaussian) + ~400-yr reservoir age (490 yr near 13.5 ka)."))

    csv("truth/climate.csv", climate)
    text("truth/event.toml", _event_toml())
    csv("truth/midge_responses.csv", responses)
    text("truth/forward_models.toml", _forward_toml("midge_responses.csv"))

    ulla = make_ulla(climate, atmosphere, responses)
    text("cores/ULLA-1/core.toml", _core_toml(
        "ULLA-1", {"samples": "samples.csv", "dates": "dates.csv", "counts": "counts.csv"},
        sections=(("A", 0.0), ("B", ULLA_SECTION_B_TOP_CM)),
        event_layers=tuple((t, b, "turbidite") for t, b in ULLA_AGE_DEPTH.event_layers)))
    csv("cores/ULLA-1/samples.csv", ulla["samples"])
    csv("cores/ULLA-1/counts.csv", ulla["counts"])
    csv("cores/ULLA-1/dates.csv", ulla["dates"])

    tel07 = make_tel07(climate, marine)
    text("cores/TEL-07/core.toml", _core_toml("TEL-07", {"samples": "samples.xlsx", "dates": "dates.csv"}))
    _write_xlsx(out / "cores/TEL-07/samples.xlsx", tel07["samples"], "samples")
    written.append(pathlib.Path("cores/TEL-07/samples.xlsx"))
    csv("cores/TEL-07/dates.csv", tel07["dates"])

    corv = make_corv(climate)
    text("cores/CORV-3/core.toml", _core_toml(
        "CORV-3", {"samples": "samples.csv", "dates": "dates.csv"}, depth_unit="mm",
        extra_core={"top_age_error": 1.0}))
    csv("cores/CORV-3/samples.csv", corv["samples"])
    csv("cores/CORV-3/dates.csv", corv["dates"])

    tel12 = make_tel12(climate, marine)
    text("cores/TEL-12/core.toml", _core_toml(
        "TEL-12", {"samples": "samples.parquet", "dates": "dates.tsv"}, hiatuses=TEL12_AGE_DEPTH.hiatus_depths_cm))
    _write_parquet(out / "cores/TEL-12/samples.parquet", tel12["samples"])
    written.append(pathlib.Path("cores/TEL-12/samples.parquet"))
    csv("cores/TEL-12/dates.tsv", tel12["dates"], sep="\t")

    for core_id, result in (("ULLA-1", ulla), ("TEL-07", tel07), ("CORV-3", corv), ("TEL-12", tel12)):
        csv(f"truth/{core_id}_ages.csv", result["ages"])
        csv(f"truth/{core_id}_samples.csv", result["truth_samples"])
        csv(f"truth/{core_id}_dates.csv", result["truth_dates"])

    csv("training/midges_modern.csv", make_training(responses))
    csv("instrumental/invented_station.csv", make_station(climate))
    return written


if __name__ == "__main__":
    target = pathlib.Path(sys.argv[1]) if len(sys.argv) > 1 else pathlib.Path(__file__).resolve().parent
    for relative in main(target):
        print(target / relative)

"""The declarations of the run folder's tables (see :mod:`pipelines.outputs_schema`, which
checks frames and files against them and generates the README's table from them).

Adding a table is one :class:`OutputTable` in :data:`TABLES` (see DEVELOPERS.md, "A new
output table").
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from proxies.members import MEMBER_COLUMN_PATTERN

__all__ = ["Column", "Family", "OutputTable", "TABLES", "CORE_TABLES"]


@dataclass(frozen=True)
class Column:
    """One declared column: name, logical dtype, units ("" when dimensionless), meaning, and
    how the report draws it (``role``: ``"measure"`` a per-sample quantity drawn as a panel,
    ``"limit"`` a level drawn as a line on the measures' panel, ``""`` not drawn as such)."""

    name: str
    dtype: str
    units: str
    doc: str
    role: str = ""


@dataclass(frozen=True)
class Family:
    """Columns named by a pattern (e.g. ``m\\d{4}`` for ensemble members)."""

    pattern: str
    example: str
    dtype: str
    units: str
    doc: str

    def matches(self, name: str) -> bool:
        return re.fullmatch(self.pattern, name) is not None


@dataclass(frozen=True)
class OutputTable:
    """One run-folder table (see the module docstring)."""

    key: str
    path: str
    doc: str
    columns: tuple[Column, ...]
    families: tuple[Family, ...] = ()
    file_format: str = "parquet"
    #: columns a reader may rely on (the writer always writes them); the others are optional
    required: tuple[str, ...] = ()
    #: the stage writes the CSV copy (``X.csv``, :func:`pipelines.report.csv.table_csv_text`)
    #: beside the table itself, so it exists without the exports (which then leave it alone)
    with_csv: bool = False

    @property
    def file_name(self) -> str:
        return self.path.rsplit("/", 1)[-1]

    @property
    def csv_file_name(self) -> str:
        """The CSV copy's file name (``X.csv`` beside ``X.parquet``)."""
        return self.file_name.rsplit(".", 1)[0] + ".csv"

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.columns)

    def column(self, name: str) -> Column | Family | None:
        for column in self.columns:
            if column.name == name:
                return column
        for family in self.families:
            if family.matches(name):
                return family
        return None

    def path_pattern(self) -> re.Pattern:
        text = re.escape(self.path).replace(re.escape("<core>"), r"[^/]+").replace(re.escape("<name>"), r"[^/]+")
        return re.compile(text)


def _c(name: str, dtype: str, units: str, doc: str, role: str = "") -> Column:
    return Column(name, dtype, units, doc, role)


def _columns(text: str, roles: dict[str, str] | None = None) -> tuple[Column, ...]:
    """Columns declared as a text table, one line each: ``name | dtype | units | doc`` (units
    empty when dimensionless; the doc, the rest of the line, may itself hold ``|``). ``roles``
    gives the report role of the columns that have one (see :class:`Column`)."""
    roles = roles or {}
    columns = []
    for line in text.strip().splitlines():
        name, dtype, units, doc = (field.strip() for field in line.split("|", 3))
        columns.append(Column(name, dtype, units, doc, roles.pop(name, "")))
    if roles:
        raise ValueError(f"roles given for undeclared columns: {sorted(roles)}")
    return tuple(columns)


def _quantiles(prefix: str, units: str, what: str,
               levels=("q025", "q160", "median", "q840", "q975")) -> tuple[Column, ...]:
    words = {"q025": "2.5 %", "q160": "16 %", "median": "50 %", "q840": "84 %", "q975": "97.5 %"}
    return tuple(_c(f"{prefix}_{level}", "float", units, f"{words[level]} quantile of {what} over members")
                 for level in levels)


_MEMBERS = Family(MEMBER_COLUMN_PATTERN, "m0000", "float", "as the row's quantity", "one column per ensemble member")
_AGE = _c("age_cal_bp", "float", "cal BP", "grid age")
_VARIABLE = _c("variable", "string", "", "reconstructed climate variable")
_SUMMARY_STAT = ("median", "q025", "q975")

#: every run-folder table, by key; the order is the README's
TABLES: dict[str, OutputTable] = {t.key: t for t in (
    OutputTable("summary", "summary.parquet", "one row per core (no clock values: byte-identical)", 
        _columns("""
            core_id       | string |  | core id (or folder name when ingest failed)
            folder        | string |  | the core folder read
            status        | string |  | ok | thin | dated | failed (see Runs: status)
            stage_reached | string |  | last stage finished (none when ingest failed)
            n_warnings    | int    |  | number of warnings
            warnings      | string |  | warnings, separated by ' | '
            notes         | string |  | notes (skipped stages...), separated by ' | '
            error         | string |  | the failing stage and its message (empty when ok)
        """), required=("core_id", "folder", "status", "stage_reached", "n_warnings", "warnings", "notes", "error")),
    OutputTable("timings", "timings.csv", "seconds per core and stage (clock-dependent, kept apart)", 
        _columns("""
            core_id | string |   | core id
            stage   | string |   | stage name
            seconds | float  | s | wall time of the stage
            reused  | bool   |   | taken from the work store
        """), file_format="csv", required=("core_id", "stage", "seconds", "reused")),
    OutputTable("stack", "stack.parquet", "regional composite of all reconstructions", (
        _AGE, _VARIABLE,
        *_columns("""
            method | string |  | what was composited (anomaly | value)
        """),
        *_quantiles("value", "variable units", "the composite"),
        *_columns("""
            n_records          | int   |        | cores contributing at this age
            stack_young_cal_bp | float | cal BP | young end of the composite's window
            stack_old_cal_bp   | float | cal BP | old end of the composite's window
        """)), required=("age_cal_bp", "variable", "value_median", "value_q025", "value_q975")),
    OutputTable("stack_ensemble", "stack_ensemble.parquet", "every member of the regional composite", (
        _AGE, _VARIABLE), (_MEMBERS,), required=("age_cal_bp", "variable")),
    OutputTable("regional_events", "regional_events.parquet",
                "events found in the regional composite, with the regional onset", (
        _VARIABLE, _c("event_id", "string", "", "event id (within the stack)"),
        *_columns("""
            kind      | string |  | shift | excursion
            direction | string |  | positive | negative
        """),
        *(_c(f"{q}_{s}", "float", "variable units" if q == "amplitude" else "cal BP" if q in ("onset", "midpoint") else "yr",
             f"{s} of the regional {q} over the composite's members")
          for q in ("onset", "midpoint", "duration", "amplitude") for s in _SUMMARY_STAT),
        *_columns("""
            probability | float  |  | share of composite members showing the event
            p_value     | float  |  | red-noise p-value of the event in the composite
            significant | bool   |  | p_value below alpha and amplitude 95 % range excluding zero
            n_members   | number |  | composite members showing the event
            n_records   | int    |  | records in the composite at the onset median
            records     | string |  | the composite's records (core/series), comma separated
            note        | string |  | why an event below alpha is not called significant
        """)),
        required=("variable", "event_id", "onset_median", "onset_q025", "onset_q975", "significant")),
    OutputTable("regional_onsets", "regional_onsets.parquet", "regional onset of each stack event in each member", (
        _VARIABLE, _c("event_id", "string", "", "event id (within the stack)"),
        *_columns("""
            member       | int   |                | composite member index
            onset_cal_bp | float | cal BP         | onset age in that member
            end_cal_bp   | float | cal BP         | end of the change in that member
            amplitude    | float | variable units | change in that member (ramp fit)
            detected     | bool  |                | the member detects the event (else: its fitted change at the event's place)
        """)),
        required=("variable", "event_id", "member", "onset_cal_bp")),
    OutputTable("training_cv", "training/<name>_cv.parquet",
                "cross-validated observed vs predicted of a training set", 
        _columns("""
            id           | string |              | modern sample id
            observed     | float  | target units | observed target value
            predicted    | float  | target units | cross-validated prediction, chosen components
            residual     | float  | target units | predicted - observed
            n_components | int    |              | components of the chosen model
        """),
        (Family(r"predicted_c\d+", "predicted_c1", "float", "target units",
                "cross-validated prediction with that many components (WA-PLS)"),), required=("observed", "predicted")),
    OutputTable("training_skill", "training/<name>_skill.parquet", "skill per number of components", 
        _columns("""
            training               | string |              | training set name
            model                  | string |              | wa | wapls | mat
            validation             | string |              | cross-validation scheme
            n_components           | int    |              | components (analogues for MAT)
            rmse_apparent          | float  | target units | apparent RMSE
            rmsep                  | float  | target units | cross-validated RMSE of prediction
            r2_apparent            | float  |              | apparent r²
            r2_cv                  | float  |              | cross-validated r²
            mean_bias_cv           | float  | target units | mean cross-validated residual
            segment_bias_cv        | float  | target units | largest mean residual of a target segment
            rmsep_vs_fewer_percent | float  | %            | RMSEP change against one component fewer
            randomisation_p        | float  |              | randomisation t-test p against one component fewer (van der Voet 1994)
            chosen                 | bool   |              | the number of components used
        """), required=("n_components", "rmsep")),
    OutputTable("chronology", "<core>/chronology.parquet", "age-depth model summary per output depth", 
        _columns("""
            depth_cm              | float | cm     | composite depth
            event_free_depth_cm   | float | cm     | depth with instantaneous deposits cut out
            age_median            | float | cal BP | median age over members
            age_q025              | float | cal BP | 2.5 % quantile of age
            age_q975              | float | cal BP | 97.5 % quantile of age
            age_mean              | float | cal BP | mean age
            age_sd                | float | yr     | standard deviation of age
            deposition_time_yr_cm | float | yr/cm  | median deposition time
            hiatus_gap_yr         | float | yr     | median age gap of a hiatus just below this depth (else empty)
        """), required=("depth_cm", "age_median", "age_q025", "age_q975")),
    OutputTable("age_ensemble", "<core>/age_ensemble.parquet", "age of every member at each depth", (
        *_columns("""
            depth_cm | float | cm | composite depth
        """),), (_MEMBERS,), required=("depth_cm",)),
    OutputTable("dates", "<core>/dates.parquet",
                "each date's inputs with its calibration and outlier probability", 
        _columns("""
            label               | string |                     | date label (the core-top constraint is 'core top')
            depth_cm            | float  | cm                  | composite depth
            kind                | string |                     | radiocarbon | calendar
            age                 | float  | 14C yr BP or cal BP | measured age as given
            error               | float  | yr                  | 1-sigma error as given
            thickness_cm        | float  | cm                  | sample thickness
            curve               | string |                     | curve named in the input
            reservoir_offset    | float  | 14C yr              | reservoir offset as given
            reservoir_error     | float  | 14C yr              | its 1-sigma error
            exclude             | bool   |                     | excluded from the age model
            constraint          | bool   |                     | a constraint, never an outlier (the core top)
            source_row          | number |                     | 1-based row of the input file (empty for the core top)
            section             | string |                     | section named in the input
            section_depth_cm    | float  | cm                  | depth below the section top as given
            material            | string |                     | dated material as given
            curve_used          | string |                     | curve the date was calibrated on
            event_free_depth_cm | float  | cm                  | depth with instantaneous deposits cut out
            cal_median_bp       | float  | cal BP              | median of the calibrated date
            cal_mode_bp         | float  | cal BP              | mode of the calibrated date
            cal_mean_bp         | float  | cal BP              | mean of the calibrated date
            hpd95_young_bp      | float  | cal BP              | young end of the 95.4 % HPD ranges
            hpd95_old_bp        | float  | cal BP              | old end of the 95.4 % HPD ranges
            outlier_prob        | float  |                     | posterior outlier probability
            model_age_median_bp | float  | cal BP              | age model median at the date's depth
        """), required=("label", "depth_cm", "kind", "age", "error", "cal_median_bp")),
    OutputTable("date_ranges", "<core>/date_ranges.parquet",
                "HPD ranges of each calibrated date, one row per range", 
        _columns("""
            label        | string |        | date label
            level        | float  |        | HPD level (0.683 or 0.954)
            young_cal_bp | float  | cal BP | young end of the range
            old_cal_bp   | float  | cal BP | old end of the range
            probability  | float  |        | probability mass inside the range
        """), required=("label", "level", "young_cal_bp", "old_cal_bp", "probability")),
    OutputTable("date_densities", "<core>/date_densities.parquet",
                "calibrated density of each date (before the age model), thinned for plotting", (
        *_columns("""
            label | string |  | date label
        """), _AGE,
        *_columns("""
            density | float | 1/yr | probability density
        """)), required=("label", "age_cal_bp", "density")),
    OutputTable("hyperparameters", "<core>/hyperparameters.parquet",
                "accumulation models: posterior weight of every hyper-parameter point (empty for the "
                "interpolation model)", 
        _columns("""
            model            | string |       | memory | accumulation
            mean_rate_yr_cm  | float  | yr/cm | mean accumulation rate (deposition time)
            rate_variability | float  |       | coefficient of variation of the rate
            rate_memory      | float  |       | persistence of the rate class over reference_depth_cm (0: none)
            log_evidence     | float  |       | exact log marginal likelihood of the dates
            weight           | float  |       | posterior weight (sums to 1)
        """), required=("mean_rate_yr_cm", "weight")),
    OutputTable("calibration", "<core>/calibration.parquet", "skill per proxy and period", (
        *_columns("""
            proxy | string |  | proxy column
        """), _VARIABLE,
        *_columns("""
            units                         | string |                | units of the variable
            method                        | string |                | calibration method
            detail                        | string |                | equation, training set or overlap detail
            reference                     | string |                | published source or training set
            period                        | string |                | published | full | verify_early | verify_late | cross_validation | random_variable_test
            status                        | string |                | used | ...
            n_calibration                 | number |                | samples in the calibration period
            n_verification                | number |                | samples in the verification period
            r2                            | float  |                | r²
            rmse                          | float  | variable units | root-mean-square error
            re                            | float  |                | reduction of error RE
            ce                            | float  |                | coefficient of efficiency CE
            durbin_watson                 | float  |                | Durbin-Watson statistic of residuals
            n_effective                   | float  |                | effective sample size
            calibration_error             | float  | variable units | calibration 1-sigma error
            n_components                  | number |                | transfer-function components
            n_members                     | number |                | ensemble members behind the statistics
            n_members_few_pairs           | number |                | overlap: members fitted on fewer than min_pairs pairs
            n_members_failed              | number |                | overlap: members that could not be fitted
            n_outside_range               | number |                | samples outside the calibrated range
            variance_explained            | float  |                | random-variable test: share of the fossil assemblages' variance the reconstruction explains
            random_variance_explained_q95 | float  |                | random-variable test: 95th percentile of that share for random variables
            first_axis_explained          | float  |                | random-variable test: share of the first principal axis
            p_value                       | float  |                | random-variable test: p-value (Telford & Birks 2011)
        """)), required=("proxy", "variable", "method")),
    OutputTable("calibrated_samples", "<core>/calibrated_samples.parquet",
                "calibrated value of each sample (depth scale, before the time grid)", (
        *_columns("""
            depth_cm | float  | cm | composite depth
            proxy    | string |    | proxy column
        """), _VARIABLE,
        *_columns("""
            units  | string |  | units of the variable
            method | string |  | calibration method
        """),
        *_quantiles("value", "variable units", "the value", ("median", "q025", "q975")),
        *_columns("""
            value_mean                | float | variable units | mean over members
            value_sd                  | float | variable units | standard deviation over members
            outside_calibration_range | bool  |                | outside the calibrated range (no close analogue for transfer functions)
            source_row                | int   |                | 1-based row of samples/counts
        """)), required=("depth_cm", "proxy", "variable", "value_median")),
    OutputTable("calibration_diagnostics", "<core>/calibration_diagnostics.parquet",
                "fossil-sample diagnostics of transfer functions",
        _columns("""
            depth_cm                  | float  | cm           | composite depth
            proxy                     | string |              | proxy (assemblage)
            training                  | string |              | training set
            prediction                | float  | target units | prediction of the fitted model
            prediction_error          | float  | target units | sample-specific error
            nearest_analogue_distance | float  |              | squared-chord distance to the nearest modern sample
            good_analogue_limit       | float  |              | distance below which an analogue is good
            no_analogue_limit         | float  |              | distance above which there is no close analogue
            analogue_quality          | string |              | good | fair | none
            missing_taxa_percent      | float  | %            | share of the sample's taxa absent from training
            n_missing_taxa            | int    |              | taxa absent from training
            source_row                | int    |              | 1-based row of counts
        """, roles={"nearest_analogue_distance": "measure", "good_analogue_limit": "limit", "no_analogue_limit": "limit",
                    "missing_taxa_percent": "measure", "n_missing_taxa": "measure"}), required=("depth_cm", "proxy")),
    OutputTable("samples_dated", "<core>/samples_dated.parquet",
                "every sample with its depth, age, raw proxies, calibrated values and flags "
                "(the supplement table; one row per sample level, in depth order)",
        _columns("""
            depth_cm            | float  | cm     | composite depth of the sample's mid-point
            thickness_cm        | float  | cm     | sample thickness (empty when not given)
            event_free_depth_cm | float  | cm     | depth with the event layers cut out (the age model's scale)
            section             | string |        | core section
            section_depth_cm    | float  | cm     | depth below the section top
            samples_row         | int    |        | 1-based row of the samples file (-1: not in it)
            counts_row          | int    |        | 1-based row of the counts file (-1: not in it)
            age_median_cal_bp   | float  | cal BP | median age over the age-ensemble members
            age_q160_cal_bp     | float  | cal BP | young end of the 68 % age range (16 % quantile)
            age_q840_cal_bp     | float  | cal BP | old end of the 68 % age range (84 % quantile)
            age_q025_cal_bp     | float  | cal BP | young end of the 95 % age range (2.5 % quantile)
            age_q975_cal_bp     | float  | cal BP | old end of the 95 % age range (97.5 % quantile)
            in_event_layer      | bool   |        | the sample lies inside an event layer (instantaneous deposit)
            event_layer_kind    | string |        | kind of that event layer (turbidite, tephra, ...)
            count_sum           | float  | count  | total count of the assemblage sample
        """), (
        Family(r".+_from_.+_(median|q025|q975)", "sst_degC_from_uk37_median", "float",
               "the units in its name", "median / 2.5 % / 97.5 % of <variable> calibrated from <proxy>"),
        Family(r".+_uncalibrated", "uk37_uncalibrated", "bool", "",
               "<proxy> measured but no calibrated value (e.g. outside the equation's domain)"),
        Family(r".+_outside_range", "uk37_outside_range", "bool", "",
               "<proxy> or its calibrated value outside the equation's calibrated range"),
        Family(r".+_poor_analogue", "counts_poor_analogue", "bool", "",
               "no close modern analogue in the training set"),
        Family(r".+_analogue", "counts_analogue", "string", "", "nearest modern analogue: good | fair | none"),
        Family(r"[A-Za-z_][A-Za-z0-9_]*", "uk37", "float", "as its name says",
               "every raw proxy column of the samples file, as given (and its _error column)")),
        required=("depth_cm", "thickness_cm", "event_free_depth_cm", "age_median_cal_bp",
                  "age_q160_cal_bp", "age_q840_cal_bp", "age_q025_cal_bp", "age_q975_cal_bp",
                  "in_event_layer", "event_layer_kind"), with_csv=True),
    OutputTable("reconstruction", "<core>/reconstruction.parquet", "values and anomalies on the time grid", (
        _AGE, _c("year_ce", "float", "yr CE", "1950 - age_cal_bp"), _VARIABLE,
        *_columns("""
            proxy | string |  | proxy behind the series
            units | string |  | units of the variable
        """),
        *_quantiles("value", "variable units", "the value"),
        *_columns("""
            member_share | float |  | share of members with a value at this age
        """),
        *_quantiles("anomaly", "variable units", "the anomaly"),
        *_columns("""
            n_samples              | int   |        | samples behind the grid point
            reference_young_cal_bp | float | cal BP | young end of the reference window
            reference_old_cal_bp   | float | cal BP | old end of the reference window
        """)), required=("age_cal_bp", "variable", "value_median")),
    OutputTable("reconstruction_ensemble", "<core>/reconstruction_ensemble.parquet",
                "every member of values and anomalies on the grid", (
        _AGE, _VARIABLE, _c("quantity", "string", "", "value | anomaly")), (_MEMBERS,), required=("age_cal_bp", "variable", "quantity")),
    OutputTable("events", "<core>/events.parquet", "abrupt events with onset distributions", (
        *_columns("""
            core_id  | string |  | core id
            event_id | string |  | event id
        """), _VARIABLE,
        *_columns("""
            kind      | string |  | kind of change
            direction | string |  | up | down
        """),
        *(_c(f"{q}_{s}", "float", "variable units" if q == "amplitude" else "cal BP" if q in ("onset", "end") else "yr",
             f"{s} of the event's {q} over members") for q in ("onset", "end", "duration", "amplitude")
          for s in _SUMMARY_STAT),
        *_columns("""
            probability | float  |    | share of members showing the event
            p_value     | float  |    | red-noise p-value
            significant | bool   |    | p_value below alpha and amplitude 95 % range excluding zero
            n_members   | number |    | members showing the event
            tau_yr      | float  | yr | AR(1) persistence time
            note        | string |    | why an event below alpha is not called significant (empty otherwise)
        """)), required=("event_id", "variable", "onset_median", "onset_q025", "onset_q975")),
    OutputTable("event_probability", "<core>/event_probability.parquet", "event probability through time", (
        _AGE, _VARIABLE, _c("probability", "float", "", "share of members with an event onset here")), required=("age_cal_bp", "variable", "probability")),
    OutputTable("event_onsets", "<core>/event_onsets.parquet", "onset of each event in each member", 
        _columns("""
            event_id     | string |                | event id
            member       | int    |                | member index
            onset_cal_bp | float  | cal BP         | onset age in that member
            end_cal_bp   | float  | cal BP         | end of the change in that member (ramp fit)
            amplitude    | float  | variable units | change in that member (ramp fit)
            detected     | bool   |                | the member detects the event (else: its fitted change at the event's place)
        """), required=("event_id", "member", "onset_cal_bp")),
    OutputTable("archive_events", "archive_events.parquet",
                "every core's events with archive-wide false discovery rate control", (
        *_columns("""
            core_id  | string |  | core id
            event_id | string |  | event id (within its core)
        """), _VARIABLE,
        *_columns("""
            kind      | string |  | shift | excursion
            direction | string |  | positive | negative
        """),
        *(_c(f"{q}_{s}", "float", "variable units" if q == "amplitude" else "cal BP", f"{s} of the event's {q} over members")
          for q in ("onset", "amplitude") for s in _SUMMARY_STAT),
        *_columns("""
            probability  | float  |  | share of members showing the event
            p_value      | float  |  | red-noise p-value of the event (its own series)
            q_value      | float  |  | Benjamini-Hochberg adjusted p-value over all events of the run
            significant  | bool   |  | p_value below alpha and amplitude 95 % range excluding zero
            survives_fdr | bool   |  | significant and q_value at most alpha
            note         | string |  | why an event below alpha is not called significant
        """)),
        required=("core_id", "event_id", "variable", "p_value", "q_value", "survives_fdr")),
    OutputTable("lead_lag", "lead_lag.parquet", "lead/lag of events found in several cores", (
        *_columns("""
            core_a    | string |  | first core
            event_a   | string |  | its event
            core_b    | string |  | second core
            event_b   | string |  | its event
        """), _VARIABLE,
        *_columns("""
            kind                | string |    | shift | excursion
            direction           | string |    | positive | negative
            lag_median_yr       | float  | yr | median of onset_a - onset_b over member pairs (positive: a leads)
            lag_q025_yr         | float  | yr | 2.5 % quantile of the lag
            lag_q975_yr         | float  | yr | 97.5 % quantile of the lag
            probability_a_leads | float  |    | probability that core a's onset is older
            n_members_a         | number |    | member onsets of core a
            n_members_b         | number |    | member onsets of core b
        """)),
        required=("core_a", "core_b", "lag_median_yr", "lag_q025_yr", "lag_q975_yr", "probability_a_leads")),
)}

#: the per-core tables, in the order a core's stages write them
CORE_TABLES = tuple(k for k, t in TABLES.items() if t.path.startswith("<core>/"))


"""Shared dashboard pieces: URL-backed widgets, the band controls, downloads, cautions and number formats."""

from __future__ import annotations

import contextlib
import itertools
import math
import re
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any, NoReturn, TypeVar

import pandas as pd
import streamlit as st

from milepost.dashboard import charts, connection, queries, tables
from milepost.validate.cells import csv_bytes
from milepost.validate.errors import LoadError

T = TypeVar("T")

CAUTION = (
    "Model projections, not forecasts: each number is what one model computes under one scenario's assumptions. "
    "Mitigation costs exclude avoided climate damages and co-benefits."
)
BASIS_LABELS = {"raw": "as submitted", "harmonised": "harmonised"}
HARMONISED_NOTE = (
    "Harmonised values are aligned with the contract's reference values in the base year and move back to each "
    "model's own values by the convergence year; they are model projections too, not forecasts."
)
_URL = "_url_state"  # the query parameters this run wants in the address bar
_KEEP = "_kept_values"  # widget values that survive visits to pages that do not show the widget
CSV_RAW = "csv_raw_text"  # the sidebar option: CSV downloads keep formula-like text as it is


def begin_run() -> None:
    """Start collecting this run's URL state (called by app.py before the page runs)."""
    st.session_state[_URL] = {}


def publish_url() -> None:
    """Replace the address-bar query with the current page's filters, so the view can be shared and restored."""
    wanted = st.session_state.get(_URL, {})
    current = {k: st.query_params.get_all(k) for k in st.query_params}
    as_lists = {k: v if isinstance(v, list) else [v] for k, v in wanted.items()}
    if current != as_lists:
        if wanted:
            st.query_params.from_dict(wanted)
        else:  # from_dict({}) empties the params without telling the browser
            st.query_params.clear()


def end_run() -> None:
    """Finish a page (app.py after the page, or `stop`): the CSV option at the foot of the sidebar, then the URL."""
    st.sidebar.toggle(
        "Keep formula-like text raw in CSV downloads",
        key=CSV_RAW,
        help="Off: a text cell starting with =, +, -, @, a tab or a carriage return gets a leading ' in the CSV, "
        "so a spreadsheet shows it as text instead of running it as a formula. On: every cell exactly as stored.",
    )
    publish_url()


def stop() -> NoReturn:
    """End the page early, keeping the sidebar and the address bar in step (Streamlit drops commands issued
    after st.stop)."""
    end_run()
    st.stop()


def _url_values(param: str) -> list[str]:
    return st.query_params.get_all(param) if param in st.query_params else []


def url_widget(
    widget: Callable[..., T],
    label: str,
    *,
    key: str,
    param: str,
    default: Any,
    parse: Callable[[list[str]], Any],
    dump: Callable[[Any], str | list[str]],
    valid: Callable[[Any], bool] = lambda v: True,
    **kwargs: Any,
) -> T:
    """A widget whose value starts from the URL (if valid), else from earlier on this session, else `default`.

    Its value is written back to the URL at the end of the run.
    """
    keep = st.session_state.setdefault(_KEEP, {})
    if key in st.session_state and valid(st.session_state[key]):
        # re-assigning hands the value to this page's widget: a widget of the same key on another page has
        # another identity, and Streamlit would otherwise reset it to its default after a page switch
        st.session_state[key] = st.session_state[key]
    else:
        candidates = []
        raw = _url_values(param)
        if raw:
            with contextlib.suppress(ValueError, TypeError):
                candidates.append(parse(raw))
        if key in keep:
            candidates.append(keep[key])
        st.session_state[key] = next((c for c in candidates if valid(c)), default)
    value = widget(label, key=key, **kwargs)
    keep[key] = value
    st.session_state.setdefault(_URL, {})[param] = dump(value)
    return value


def url_checkbox(label: str, *, key: str, param: str, help: str) -> bool:
    """A checkbox, off by default, kept in the URL as `param=1` / `param=0`."""
    return bool(
        url_widget(
            st.checkbox,
            label,
            key=key,
            param=param,
            default=False,
            parse=lambda raw: raw[0] == "1",
            dump=lambda v: "1" if v else "0",
            help=help,
        )
    )


def url_selectbox(
    label: str,
    options: list[Any],
    *,
    key: str,
    param: str,
    default: Any,
    cast: Callable[[str], Any] = str,
    **kwargs: Any,
) -> Any:
    """A selectbox backed by one query parameter."""
    fallback = default if default in options else (options[0] if options else None)
    return url_widget(
        st.selectbox,
        label,
        key=key,
        param=param,
        default=fallback,
        options=options,
        parse=lambda raw: cast(raw[0]),
        dump=str,
        valid=lambda v: v in options,
        **kwargs,
    )


def url_multiselect(label: str, options: list[str], *, key: str, param: str, **kwargs: Any) -> list[str]:
    """A multiselect backed by a repeated query parameter."""
    return url_widget(
        st.multiselect,
        label,
        key=key,
        param=param,
        default=[],
        options=options,
        parse=list,
        dump=list,
        valid=lambda v: isinstance(v, list) and set(v) <= set(options),
        **kwargs,
    )


def query(fn: Callable[..., T], *args: Any, **kwargs: Any) -> T:
    """Run one query function on its own cursor of the cached read-only connection."""
    cur = connection.cursor()
    try:
        return fn(cur, *args, **kwargs)
    finally:
        cur.close()


# Every session asks the same questions of the same file: a new browser tab is a new Streamlit session, so answers
# kept in session state would be computed again for each reviewer. Answers are shared instead, keyed by the file's
# version (connection.file_key: a replaced file is a new key) and the question; cache_data hands each caller a copy.
@st.cache_data(max_entries=128, show_spinner=False)
def _shared(version: tuple[str, int, int], name: str, _fn: Callable[..., Any], args: tuple[Any, ...]) -> Any:
    cur = connection.cursor_of(version)
    try:
        return _fn(cur, *args)
    finally:
        cur.close()


def shared_query(fn: Callable[..., T], *args: Any) -> T:
    """`query`, answered once per version of the database file for every session (its arguments must be hashable
    by Streamlit: plain values, tuples, frozen dataclasses)."""
    name = f"{fn.__module__}.{fn.__qualname__}"
    answer: T = _shared(connection.file_key(connection.db_path()), name, fn, args)
    return answer


@st.cache_data(max_entries=8, show_spinner=False)
def _choices(version: tuple[str, int, int]) -> queries.Choices:
    return query(queries.choices)


def choices() -> queries.Choices:
    """What the database offers, computed once per version of the file (the key changes when ingest replaces it)."""
    return _choices(connection.file_key(connection.db_path()))


def require_database() -> None:
    """Stop the page with a clear message if the database file is missing or unreadable."""
    path = connection.db_path()
    try:
        connection.connection(path)
    except FileNotFoundError:
        st.error(
            f"No database at `{path}`. Load submissions with `milepost ingest`, or pass `--db PATH` (env MILEPOST_DB)."
        )
        stop()
    except LoadError as e:
        st.error(f"{e}")
        stop()


def caution() -> None:
    """The caution every results page carries."""
    st.caption(f"⚠️ {CAUTION}")


def chart(ch: charts.Chart, name: str, key: str) -> None:
    """Show an Altair chart with PNG and SVG downloads (rendered only when clicked)."""
    st.altair_chart(ch, width="stretch")
    # a wrapping row sized to the buttons: fixed column shares left only the icons visible in a half-width panel
    row = st.container(horizontal=True, gap="small")
    row.download_button(
        "PNG",
        data=lambda: charts.to_png(ch),
        file_name=f"{name}.png",
        mime="image/png",
        key=f"{key}_png",
        on_click="ignore",
        icon=":material/image:",
        help="The chart as a PNG image.",
    )
    row.download_button(
        "SVG",
        data=lambda: charts.to_svg(ch),
        file_name=f"{name}.svg",
        mime="image/svg+xml",
        key=f"{key}_svg",
        on_click="ignore",
        icon=":material/image:",
        help="The chart as an SVG vector image.",
    )


def table(
    df: pd.DataFrame,
    name: str,
    key: str,
    *,
    unit: str | None = None,
    columns: dict[str, tables.Column | str] | None = None,
    first: tuple[str, ...] = (),
    findings: bool = False,
    **kwargs: Any,
) -> None:
    """Show a table through the formatting layer (dashboard/tables.py) with a CSV download of exactly what is shown.

    `findings`: a table of findings, message and hint first."""
    known = tables.FINDING_COLUMNS if findings else None
    df, config = tables.prepare(
        df, unit=unit, columns=columns, first=tables.FINDINGS_FIRST if findings else first, known=known
    )
    st.dataframe(
        df, hide_index=True, width="stretch", key=key, column_config=config, placeholder=tables.PLACEHOLDER, **kwargs
    )
    # formula-like text gets a leading ' (milepost.validate.cells) unless the sidebar's option keeps it raw;
    # the toggle is drawn at the end of the run, its state is the one of the run before
    raw = bool(st.session_state.get(CSV_RAW, False))
    st.download_button(
        "CSV",
        # written on every run, not on click: a deferred file cannot be read back by the app tests, which check
        # that formula-like text is neutralised in it (measured cost: up to 0.15 s of a Rates run)
        data=csv_bytes(df, raw_text=raw),
        file_name=f"{name}.csv",
        mime="text/csv",
        key=f"{key}_csv",
        on_click="ignore",
        icon=":material/download:",
    )


def fmt(x: float | None, digits: int = 1) -> str:
    """A number for a sentence: thousands separators, `digits` decimals, a real minus sign, 'n/a' for missing."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    text = f"{x:,.{digits}f}"
    return text.replace("-", "−")


def parse_edges(text: str) -> tuple[float, ...]:
    """Band edges from free text ('40000, 52,000' is not ambiguous: separators are ';' or whitespace or ', ')."""
    parts = [p for p in re.split(r"[;\s]+|,\s+", text.strip()) if p]
    return tuple(sorted({float(p.replace(",", "").replace("_", "")) for p in parts}))


def band_sidebar(ch: queries.Choices) -> queries.Selection:
    """The band definition shared by every results page, in the sidebar and in the URL."""
    sb = st.sidebar
    with sb:
        st.header("Bands")
        variable = url_selectbox(
            "Variable",
            ch.variables,
            key="band_variable",
            param="var",
            default="emissions.ghg",
            help="The scenarios are grouped by this variable's value.",
        )
        years = ch.milestones or ch.years
        year = url_selectbox("Milestone year", years, key="band_year", param="year", default=2030, cast=int)
        region = url_selectbox("Region", ch.regions, key="band_region", param="region", default="World")
        edges_text = url_widget(
            st.text_input,
            "Band edges",
            key="band_edges",
            param="edges",
            default="",
            parse=lambda raw: raw[0],
            dump=str,
            placeholder="empty = terciles",
            help="Values that separate the bands, e.g. `42000 52000`; "
            "a scenario at an edge belongs to the band above. Empty: the terciles of the selected scenarios.",
        )
        try:
            edges = parse_edges(edges_text)
        except ValueError:
            st.warning(f"Could not read band edges {edges_text!r}: using terciles.")
            edges = ()
        st.header("Filters")
        models = url_multiselect("Models", ch.models, key="band_models", param="model", placeholder="all models")
        attribute = url_selectbox(
            "Scenario attribute",
            ["", *ch.attributes],
            key="band_attr",
            param="attr",
            default="",
            format_func=lambda a: a or "(none)",
        )
        values: list[str] = []
        if attribute:
            values = url_multiselect(
                f"{attribute} is one of",
                query(queries.attribute_values, attribute),
                key="band_attr_values",
                param="attr_value",
                placeholder="any value",
            )
        include_refs = url_checkbox(
            "Include reference scenarios",
            key="band_refs",
            param="refs",
            help="Scenarios that other scenarios name as their reference (usually no-policy runs).",
        )
        by_model = url_widget(
            st.checkbox,
            "Weight each model equally",
            key="band_weight",
            param="weight",
            default=False,
            parse=lambda raw: raw[0] == "model",
            dump=lambda v: "model" if v else "scenario",
            help="Band medians and quartiles weigh each scenario 1/n, n = its model's scenarios in the band, so a "
            "model with many scenarios does not set the median.",
        )
        basis = basis_switch(ch)
    return queries.Selection(
        variable=variable or "",
        year=int(year or 0),
        region=region or "",
        edges=edges,
        models=tuple(models),
        attribute=attribute or "",
        attribute_values=tuple(values),
        include_references=bool(include_refs),
        basis=basis,
        weighting="model" if by_model else "scenario",
    )


def basis_switch(ch: queries.Choices) -> str:
    """Raw or harmonised values for every results page (URL parameter `basis`); shown only when the database
    holds harmonised values (`milepost ingest --harmonise`)."""
    if "harmonised" not in ch.bases:
        return "raw"
    return str(
        url_widget(
            st.radio,
            "Values",
            key="band_basis",
            param="basis",
            default="raw",
            parse=lambda raw: raw[0],
            dump=str,
            valid=lambda v: v in ch.bases,
            options=ch.bases,
            format_func=lambda b: BASIS_LABELS.get(b, b),
            horizontal=True,
            help="As submitted, or harmonised to the contract's base-year reference values. Bands, rates and "
            "costs are computed from the values chosen here.",
        )
    )


def label_bands(df: pd.DataFrame, labels: list[str], column: str = "band") -> pd.DataFrame:
    """Add a `band_label` column (vectorised lookup of the band number)."""
    out = df.copy()
    out["band_label"] = pd.Series(labels, dtype="str").reindex(out[column].to_numpy()).to_numpy()
    return out


def band_ranges(edges: list[float]) -> list[str]:
    """Human-readable value range of each band, lowest first."""
    if not edges:
        return ["all values"]
    inner = [f"{fmt(lo, 0)} to < {fmt(hi, 0)}" for lo, hi in itertools.pairwise(edges)]
    return [f"< {fmt(edges[0], 0)}", *inner, f"≥ {fmt(edges[-1], 0)}"]


def bands_note(
    variable: str, year: int, region: str, labels: list[str], edges: list[float], model_weighted: bool = False
) -> str:
    """'Bands by X in Y (R): low < a; middle a to < b; high ≥ b' for a page's caption."""
    ranges = "; ".join(f"{lab} {rng}" for lab, rng in zip(labels, band_ranges(edges), strict=True))
    weights = "; statistics weight each model equally" if model_weighted else ""
    return f"Bands by {variable} in {year} ({region}): {ranges}{weights}"


@dataclass(frozen=True)
class Outcome:
    """The outcome the results speak of: the selected scenarios (None = all) and words for captions and headlines."""

    keys: tuple[tuple[str, str], ...] | None
    caption: str
    label: str  # short, for headlines: "within the 2 °C budget (67 %)"; "" for all scenarios
    likelihood: str


@st.cache_data(max_entries=8, show_spinner=False)
def _outcome_options(version: tuple[str, int, int], fallback: str, basis: str) -> queries.OutcomeOptions:
    """Computed once per version of the database file; the region is the budget region, else `fallback`."""
    return query(queries.outcome_options, query(queries.budget_region) or fallback, basis)


def _range_value(raw: list[str]) -> float | None:
    return float(raw[0].replace(",", "")) if raw and raw[0].strip() else None


def outcome_filter(ch: queries.Choices, basis: str = "raw", container: Any = None) -> Outcome:
    """The outcome control every results page shows before the bands are cut, in the sidebar and in the URL.

    All scenarios; one or more carbon-budget classes at a likelihood (budget_level); or a range of a
    scenario-level indicator of the budget region (e.g. cumulative CO2 to net zero, GHG in 2100), read on `basis`
    (raw or harmonised values). Returns the selected scenario set and the caption that says which outcome the page
    speaks of. `container` places the control (default: the sidebar).
    """
    fallback = "World" if "World" in ch.regions else (ch.regions or [""])[0]
    opts = _outcome_options(connection.file_key(connection.db_path()), fallback, basis)
    region = opts.region
    modes = ["all", *(["class"] if opts.likelihoods else []), "range"]
    names = {"all": "all scenarios", "class": "carbon-budget classes", "range": "a range of an indicator"}
    with container if container is not None else st.sidebar:
        st.header("Outcome")
        mode = url_selectbox(
            "Compare",
            modes,
            key="outcome_mode",
            param="outcome",
            default="all",
            format_func=lambda m: names[m],
            help="Hold the long-term outcome fixed: bands, medians, headlines and downloads then speak of the "
            "selected scenarios only.",
        )
        likelihood = "67%"
        if opts.likelihoods:
            likelihood = url_selectbox(
                "Budget likelihood",
                opts.likelihoods,
                key="outcome_lik",
                param="lik",
                default="67%",
                help="The likelihood of staying below the warming level at which the carbon budgets are read.",
            )
        spec = queries.OutcomeSpec(region=region, likelihood=likelihood, basis=basis)
        if mode == "class":
            classes = [queries.level_text(x) for x in opts.levels.get(likelihood, [])]
            classes += ["above"] if opts.above.get(likelihood) else []
            picked = url_multiselect(
                "Outcome classes",
                classes,
                key="outcome_classes",
                param="class",
                placeholder="pick one or more",
                format_func=lambda c: queries.class_label(None if c == "above" else float(c), likelihood),
                help="A scenario's class is the lowest warming level whose remaining carbon budget holds its CO2 "
                "summed to net zero (indicator budget_level).",
            )
            spec = replace(spec, mode="class", levels=tuple(None if c == "above" else float(c) for c in picked))
        elif mode == "range":
            names_of = dict(opts.indicators)
            indicator = url_selectbox(
                "Indicator",
                list(names_of),
                key="outcome_ind",
                param="ind",
                default=queries.indicator_key("cumulative_net_zero", "emissions.co2"),
                format_func=lambda k: names_of.get(k, k),
            )
            c1, c2 = st.columns(2)
            with c1:
                low = url_widget(
                    st.number_input, "from", key="outcome_lo", param="lo", default=None, parse=_range_value,
                    dump=lambda v: "" if v is None else repr(float(v)), valid=lambda v: v is None or math.isfinite(v),
                    placeholder="any",
                )  # fmt: skip
            with c2:
                high = url_widget(
                    st.number_input, "to", key="outcome_hi", param="hi", default=None, parse=_range_value,
                    dump=lambda v: "" if v is None else repr(float(v)), valid=lambda v: v is None or math.isfinite(v),
                    placeholder="any",
                )  # fmt: skip
            spec = replace(spec, mode="range", indicator=indicator or "", low=low, high=high)
    keys = shared_query(queries.outcome_keys, spec)
    return _describe_outcome(spec, keys, dict(opts.indicators))


def _describe_outcome(
    spec: queries.OutcomeSpec, keys: tuple[tuple[str, str], ...] | None, labels: dict[str, str]
) -> Outcome:
    if keys is None:
        hint = ""
        if spec.mode == "class":
            hint = " (no class picked yet)"
        elif spec.mode == "range":
            hint = " (no bound given yet)"
        caption = (
            f"Outcome: all scenarios{hint}. Their long-term outcomes differ, so bands can mix weak and strong goals: "
            "pick a carbon-budget class in the sidebar to compare like with like."
        )
        return Outcome(None, caption, "", spec.likelihood)
    if spec.mode == "class":
        label = " or ".join(queries.class_label(x, spec.likelihood) for x in spec.levels)
        what = f"{label}: cumulative CO2 to net zero ({spec.region}) against the carbon budgets"
    else:
        bounds = (
            f"{fmt(spec.low, 1)} to {fmt(spec.high, 1)}"
            if spec.low is not None and spec.high is not None
            else f"at least {fmt(spec.low, 1)}"
            if spec.low is not None
            else f"at most {fmt(spec.high, 1)}"
        )
        label = f"{labels.get(spec.indicator, spec.indicator)} {bounds}"
        what = f"{label} ({spec.region})"
    models = len({m for m, _ in keys})
    caption = f"Outcome: {what} — {len(keys)} scenarios of {models} models before the other filters."
    return Outcome(keys, caption, label, spec.likelihood)


def net_zero_text(years: pd.Series, searched_to: pd.Series, notes: pd.Series | None = None) -> pd.Series:
    """Net-zero years for a table: the year, "not reached by YEAR" where it is empty, and a short mark where the
    series was at or below zero already in the base year (the stored note says so). A fractional year (a crossing
    between two whole years) is rounded up: the first whole year at or below zero on the straight line."""
    out = pd.Series("", index=years.index, dtype="str")
    reached = years.notna()
    out[reached] = tables.whole_years(years[reached], round_up=True).astype("str")
    late = ~reached & searched_to.notna()
    out[late] = "not reached by " + tables.whole_years(searched_to[late]).astype("str")
    if notes is None:
        return out
    already = reached & notes.fillna("").str.contains("already", regex=False)
    out[already] = out[already] + " (already ≤ 0)"
    return out


def outdated_warning() -> None:
    """Say so when the stored indicators were computed under older conventions (a migration waits for an ingest)."""
    reason = shared_query(queries.indicators_outdated)
    if reason is not None:
        st.warning(f"Indicators may not match the definitions shown here: {reason}.", icon=":material/history:")


def results_page(title: str) -> tuple[queries.Choices, queries.Selection]:
    """The opening every results page shares: the database check, the title, the outcome control and the band
    sidebar. The returned selection carries the outcome: every query built on it speaks of that outcome only."""
    require_database()
    ch = choices()
    st.title(title)
    outdated_warning()
    if not ch.variables:
        st.info("The database holds no accepted scenarios yet.")
        stop()
    top = st.sidebar.container()  # the outcome control heads the sidebar; it reads the basis chosen below it
    sel = band_sidebar(ch)
    outcome = outcome_filter(ch, sel.basis, top)
    st.caption(outcome.caption)
    return ch, replace(sel, outcome=outcome.keys, outcome_label=outcome.label, likelihood=outcome.likelihood)

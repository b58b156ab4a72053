"""The browser bench's floor: a Streamlit page with the kinds of elements the Screen page shows, on a few rows of
invented numbers, without a database or our code.

Served with the same server options as `milepost dashboard`, it measures what Streamlit itself costs to open such
a page on this machine at this moment (its scripts, the session start, React and Vega drawing), so the browser rows
can say how much of a page open is ours. Run as `streamlit run floor_page.py`; the bench does that.
"""

from __future__ import annotations

import altair as alt
import pandas as pd
import streamlit as st

TITLES = ("Screen", "Budgets", "Rates", "Costs", "Delay", "Drivers", "Regions", "Pathways", "Submissions", "Check")


def _page() -> None:
    st.title("Screen")
    st.caption("A floor page: invented numbers.")
    with st.sidebar:
        st.header("Outcome")
        st.selectbox("Compare", ["all", "class"], key="mode")
        st.header("Bands")
        st.selectbox("Variable", ["a", "b"], key="var")
        st.selectbox("Milestone year", [2030, 2050], key="year")
        st.selectbox("Region", ["World", "R1"], key="region")
        st.text_input("Band edges", key="edges", placeholder="empty = terciles")
        st.header("Filters")
        st.multiselect("Models", ["M1", "M2"], key="models", placeholder="all models")
        st.checkbox("Include reference scenarios", key="refs")
        st.checkbox("Weight each model equally", key="weight")
        st.toggle("Keep text raw", key="raw")
    df = pd.DataFrame(
        {"value": [1.0, 2.0, 2.5, 4.0, 5.0, 7.0], "band_label": ["low", "low", "mid", "mid", "high", "high"]}
    )
    c1, c2, c3 = st.columns(3)
    c1.metric("Scenarios", len(df))
    c2.metric("Models", 2)
    c3.metric("Median", f"{df['value'].median():.0f}")
    st.subheader("a in 2030, World")
    bars = (
        alt.Chart(df)
        .mark_bar()
        .encode(x=alt.X("value:Q", bin=alt.Bin(maxbins=30)), y="count():Q", color="band_label:N")
    )
    rules = alt.Chart(pd.DataFrame({"edge": [2.2, 4.5]})).mark_rule(strokeDash=[4, 3]).encode(x="edge:Q")
    st.altair_chart(alt.layer(bars, rules).properties(height=280), width="stretch")
    row = st.container(horizontal=True, gap="small")
    row.download_button("PNG", data=b"", file_name="x.png", on_click="ignore", key="png")
    row.download_button("SVG", data=b"", file_name="x.svg", on_click="ignore", key="svg")
    summary = df.groupby("band_label", as_index=False)["value"].median()
    st.dataframe(summary, hide_index=True, width="stretch", key="bands")
    st.download_button("CSV", data=b"", file_name="bands.csv", on_click="ignore", key="bands_csv")
    st.subheader("Selected scenarios")
    st.dataframe(df, hide_index=True, width="stretch", key="table")
    st.download_button("CSV", data=b"", file_name="table.csv", on_click="ignore", key="table_csv")
    st.caption("Conventions.")


def _empty() -> None:
    st.title("empty")


st.set_page_config(page_title="floor", layout="wide")
pages = [st.Page(_page, title=TITLES[0], url_path="screen", default=True)]
pages += [st.Page(_empty, title=t, url_path=t.lower()) for t in TITLES[1:]]
st.navigation(pages).run()

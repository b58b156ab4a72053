"""Milepost reviewer dashboard: run with `milepost dashboard` (or `streamlit run dashboard/app.py -- --db PATH`)."""

from __future__ import annotations

from pathlib import Path

import streamlit as st

from milepost.dashboard import ui

# A local image: Streamlit fetches a named icon's favicon from an outside font server, which an assessment's
# machine may not reach and need not tell who reads the dashboard.
st.set_page_config(page_title="Milepost", page_icon=str(Path(__file__).with_name("icon.png")), layout="wide")

PAGES = [
    st.Page("views/screen.py", title="Screen", icon=":material/filter_alt:", default=True),
    st.Page("views/budgets.py", title="Budgets", icon=":material/thermostat:"),
    st.Page("views/rates.py", title="Rates", icon=":material/trending_down:"),
    st.Page("views/costs.py", title="Costs", icon=":material/payments:"),
    st.Page("views/delay.py", title="Delay", icon=":material/schedule:"),
    st.Page("views/drivers.py", title="Drivers", icon=":material/account_tree:"),
    st.Page("views/regions.py", title="Regions", icon=":material/public:"),
    st.Page("views/pathways.py", title="Pathways", icon=":material/timeline:"),
    st.Page("views/submissions.py", title="Submissions", icon=":material/inventory_2:"),
    st.Page("views/selfcheck.py", title="Self-check", icon=":material/fact_check:"),
]

page = st.navigation(PAGES)
ui.begin_run()
page.run()
ui.end_run()  # pages that end early call ui.stop(), which ends the run first

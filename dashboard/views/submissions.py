"""Submissions: every submission and version with status and findings per rule, and the findings themselves."""

from __future__ import annotations

import pandas as pd
import streamlit as st

from milepost.dashboard import queries, tables, ui
from milepost.validate.store.exports import listed, version_label

ui.require_database()
st.title("Submissions")
subs = ui.query(queries.submissions)
if subs.empty:
    st.info("No submissions yet: load one with `milepost ingest`.")
    ui.stop()

every = subs
show_all = ui.url_checkbox(
    "Show all attempts",
    key="subs_all",
    param="all",
    help="Also list rejected attempts that were followed by another submission of the same model or files "
    "(as `milepost submissions --all`).",
)
# the rule of `milepost submissions`, by the same function: a retried rejection is history, not a task
subs = subs[subs["id"].isin([r["id"] for r in listed(subs.to_dict("records"), show_all)])].copy()
subs["version"] = [version_label(None if pd.isna(v) else int(v)) for v in subs["version"]]
hidden = every.loc[every["retried"] & ~every["id"].isin(subs["id"]), "id"].astype(int).tolist()

counts = ui.query(queries.rule_counts)
per_rule = counts.pivot_table(index="submission_id", columns="rule", values="n", aggfunc="sum", fill_value=0)
rule_cols = list(per_rule.columns)
head = ["id", "model", "version", "status", "errors", "warnings", "notes"]
table = subs[head].merge(per_rule, left_on="id", right_index=True, how="left")
table[rule_cols] = table[rule_cols].fillna(0).astype("int64")
table = table.join(subs.drop(columns=[*head[1:], "retried"]).set_index("id"), on="id")

c1, c2, c3 = st.columns(3)
c1.metric("Submissions", len(every))
c2.metric("Accepted", int((every["status"] == "accepted").sum()))
c3.metric("Rejected", int((every["status"] == "rejected").sum()))
ui.table(table, "submissions", "subs_table", columns={r: tables.Column(r, "count") for r in rule_cols})
st.caption("Counts per rule are findings of any severity; errors/warnings/notes are the totals per severity.")
if hidden:
    st.caption(
        f"{len(hidden)} rejected attempt{'s' if len(hidden) != 1 else ''} followed by a later submission not "
        f"listed: {', '.join(map(str, hidden))} (tick *Show all attempts* to list them)."
    )

st.subheader("Findings of one submission")
ids = subs["id"].astype(int).tolist()
labels = {
    int(i): f"#{i} {m} {v}" + ("" if v.startswith(s) else f" ({s})")
    for i, m, v, s in zip(subs["id"], subs["model"], subs["version"], subs["status"], strict=True)
}
with_findings = subs.loc[subs["errors"].fillna(0) + subs["warnings"].fillna(0) + subs["notes"].fillna(0) > 0, "id"]
default_id = int(with_findings.iloc[0]) if len(with_findings) else ids[0]
sid = ui.url_selectbox(
    "Submission",
    ids,
    key="subs_id",
    param="submission",
    default=default_id,
    cast=int,
    format_func=lambda i: labels.get(i, str(i)),
)
mine = counts[counts["submission_id"] == sid]
c1, c2 = st.columns(2)
with c1:
    rules = ui.url_multiselect(
        "Rules", sorted(mine["rule"].unique().tolist()), key="subs_rules", param="rule", placeholder="every rule"
    )
with c2:
    severities = ui.url_multiselect(
        "Severities",
        sorted(mine["severity"].unique().tolist()),
        key="subs_sev",
        param="severity",
        placeholder="every severity",
    )
found = ui.query(queries.findings, sid, rules, severities)
if found.empty:
    st.success("No findings for this selection.")
else:
    ui.table(found, f"findings_{sid}", "subs_findings", findings=True)
    if len(found) >= 5000:
        st.caption("Showing the first 5,000 findings; narrow by rule or severity.")

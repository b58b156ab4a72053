"""Self-check: check uploaded files against the contract and download the report; nothing touches the database."""

from __future__ import annotations

import hashlib

import duckdb
import streamlit as st

from milepost.dashboard import connection, contracts, queries, ui
from milepost.dashboard.checking import CheckedUpload
from milepost.validate.errors import LoadError

st.title("Self-check")
st.write(
    "Upload a submission (CSV, TSV, XLSX or Parquet; a scenarios table may come with it) to see what the "
    "checks find before you submit. The files are checked in a separate process, within a memory and time "
    "budget, and nothing is stored."
)

known: list[str] = []
newest = None
if connection.db_path().exists():
    try:
        known = ui.query(queries.contract_names)
        newest = ui.query(queries.contract_name)
    except (duckdb.Error, LoadError):
        known = []
found_by_name = {n: contracts.find(n) for n in known}
usable = [n for n, f in found_by_name.items() if f.contract is not None]
if usable:
    default = usable.index(newest) if newest in usable else 0
    picked = st.selectbox(
        "Contract",
        usable,
        index=default,
        key="check_contract",
        help="The contracts the database's submissions were checked against; the newest accepted one first.",
    )
    found = found_by_name[picked]
else:
    found = contracts.find("core")
    if known:
        st.warning(
            "Using the core contract: none of the database's contracts (" + ", ".join(known) + ") is available here."
        )
contract = found.contract
if contract is None:
    st.error(f"No contract to check against: {found.source}.")
    ui.stop()
st.caption(f"Checked against contract **{contract.name}** ({found.source}; hash {contract.hash[:12]}).")

files = st.file_uploader("Files", type=["csv", "tsv", "xlsx", "parquet"], accept_multiple_files=True, key="check_files")
if not files:
    ui.stop()

digest = hashlib.sha256(
    contract.hash.encode() + b"".join(hashlib.sha256(f.getvalue()).digest() + f.name.encode() for f in files)
).hexdigest()
held = st.session_state.get("_checked")
if held is None or held[0] != digest:
    if held is not None:
        held[1].close()  # one checked upload per session: uploads can be large
    with st.spinner("Checking..."):
        st.session_state["_checked"] = (digest, CheckedUpload([(f.name, f.getvalue()) for f in files], contract))
checked: CheckedUpload = st.session_state["_checked"][1]
counts, rows, table = checked.counts, checked.rows, checked.findings
if checked.failure:
    st.error(f"The check could not finish: {checked.failure}. The server is unaffected; nothing was stored.")

c1, c2, c3, c4 = st.columns(4)
c1.metric("Rows read", f"{rows:,}")
c2.metric("Errors", counts.get("error", 0))
c3.metric("Warnings", counts.get("warning", 0))
c4.metric("Notes", counts.get("note", 0))
if counts.get("error", 0):
    st.error("Errors found: this submission would be rejected. Fix the rows below and check again.")
elif counts.get("warning", 0):
    st.warning(
        "No errors, but warnings: this submission would be accepted only if the reviewers accept "
        "warnings (`milepost ingest --accept-warnings`). Check the rows below."
    )
else:
    st.success("No errors or warnings: this submission would be accepted.")

c1, c2, _ = st.columns([1, 1, 4])
c1.download_button(
    "JSON report",
    data=checked.json,
    file_name="milepost-check.json",
    mime="application/json",
    key="check_json",
    on_click="ignore",
    icon=":material/download:",
)
c2.download_button(
    "XLSX report",
    data=checked.xlsx,
    file_name="milepost-check.xlsx",
    mime="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
    key="check_xlsx",
    on_click="ignore",
    icon=":material/download:",
)
if len(table):
    per_rule = table.groupby(["severity", "rule"]).size().rename("n").reset_index()
    ui.table(per_rule, "check_rules", "check_rules", columns={"n": "findings"})
    ui.table(table, "check_findings", "check_findings", findings=True)

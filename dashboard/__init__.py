"""The reviewer dashboard (Streamlit)."""

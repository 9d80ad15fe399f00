"""Streamlit face of the estimator: thin, all computation lives in ``estimator``."""

import streamlit as st

from estimator.cli import CAUTION

st.set_page_config(page_title="lowflow estimator", layout="wide")
st.warning(CAUTION)
st.title("Low-flow gas estimator")

"""Streamlit pages of the lowflow estimator. Thin: every number comes from the ``estimator`` package."""

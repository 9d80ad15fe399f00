"""Streamlit face of the estimator: thin, all computation lives in ``estimator``.

Run from the repository root: ``uv run streamlit run app.py``.
"""

from estimator_app.shell import main

main()

"""Streamlit face of the estimator: thin, all computation lives in ``estimator``.

Run from the repository root: ``uv run streamlit run app.py``.
"""

from estimator_app import warmup

warmup.start()

from estimator_app.shell import main  # noqa: E402

main()

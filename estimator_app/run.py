"""Entry script of the Streamlit app (``streamlit run``), as installed with the ``app`` extra.

``lowflow app`` serves this file (through ``serve.py``, with the model loaded first); in a checkout,
``uv run streamlit run app.py`` does the same.
"""

from estimator_app.shell import main

main()

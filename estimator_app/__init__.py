"""Streamlit pages of the lowflow estimator. Thin: every number comes from the ``estimator`` package.

The app caches results with ``st.cache_data``, which pickles them; pint unpickles a quantity in its
application registry. The package itself leaves that global alone, so the app, which owns its
process, points it at the package's registry here.
"""

import pint

from estimator.units import ureg

pint.set_application_registry(ureg)

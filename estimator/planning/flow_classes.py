"""Flow classes of fresh-gas flow: the named bands from metabolic to very high flow, and a classifier.

The bands are shared by the audit KPIs (:mod:`estimator.planning.audit`) and the safe-flow check
(:mod:`estimator.planning.safety`); defined here once.

References
----------
.. [1] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37.
.. [2] Brattwall M et al. Brief review: theory and practice of minimal fresh gas flow anesthesia.
   Can J Anesth 2012;59:785 (flow classes).

Examples
--------
>>> flow_class(1.0), flow_class(1.01)
('low', 'medium')
"""

from __future__ import annotations

from typing import Any

import numpy as np

#: Flow classes by fresh-gas flow [L/min], upper bounds inclusive (Brattwall et al. 2012, Table 1;
#: Baum and Aitkenhead 1995 for low, minimal and metabolic flow).
FLOW_CLASSES = (
    ("metabolic", 0.25),
    ("minimal", 0.5),
    ("low", 1.0),
    ("medium", 2.0),
    ("high", 4.0),
    ("very high", float("inf")),
)
FLOW_CLASS_SOURCE = "Baum and Aitkenhead 1995; Brattwall et al. 2012"

#: Colours of the flow classes, lowest flow first: one blue hue (206 degrees) whose lightness falls
#: step by step with the flow (91 to 28 %), so the order reads in greyscale and with any colour-vision
#: deficiency (no red-green pair). Our own ramp; every flow-class chart uses it, the name on each bar.
FLOW_CLASS_COLOURS = ("#ddeaf4", "#b4cfe4", "#89b2d1", "#5b91bb", "#356f9c", "#1b4d74")


def flow_class(flow_l_min: Any) -> Any:
    """Flow class name(s) of fresh-gas flow(s) [L/min] (Brattwall et al. 2012).

    >>> flow_class(0.5), flow_class(0.51), flow_class(6.0)
    ('minimal', 'low', 'very high')
    """
    names = np.array([n for n, _ in FLOW_CLASSES], dtype=object)
    edges = np.array([b for _, b in FLOW_CLASSES[:-1]])
    idx = np.searchsorted(edges, np.asarray(flow_l_min, dtype=float), side="left")
    out = names[idx]
    return out if np.ndim(out) else str(out)


__all__ = ["FLOW_CLASSES", "FLOW_CLASS_COLOURS", "FLOW_CLASS_SOURCE", "flow_class"]

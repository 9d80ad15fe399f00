"""Low-flow anaesthesia gas-consumption and cost estimator."""

__version__ = "0.1.0"

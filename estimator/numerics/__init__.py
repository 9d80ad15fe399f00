"""Integrators over the circuit's compiled right-hand side (DOPRI5 for one case, RKC for the batch); no physics."""

"""One accounting: volumes to masses, absorbent, CO2e on its bases, cost."""

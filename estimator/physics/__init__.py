"""Physics of the patient, the site and the gas: solubilities, physiology, MAC, closed-form laws, the circuit's right-hand side, cylinders."""

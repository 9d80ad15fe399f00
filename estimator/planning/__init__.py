"""What users plan and audit with the results: flow floor, supply, demand forecast, fresh-gas audit."""

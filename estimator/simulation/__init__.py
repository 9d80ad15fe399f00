"""One case set-up, the engines (single case, batch, patient spread) and their results."""

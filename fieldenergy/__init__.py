"""fieldenergy: stored magnetic energy, inductance and fields of air-core conductors."""

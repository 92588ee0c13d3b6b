"""Physics the analysis rests on: tungsten's resistivity against temperature,
its inverse, and the alloy factor of a tube type's heater wire."""

"""Physics of heater wire: tungsten's resistance against temperature."""

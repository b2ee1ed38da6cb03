"""Our own demo scenario: a simulated diode-clipper circuit and synthesized sources."""

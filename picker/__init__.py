"""picker: choose op-amps from the team's own stock for an amplifier stage."""

__version__ = "0.1.0"

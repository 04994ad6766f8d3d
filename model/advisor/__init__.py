"""The trade-off advisor: what each knob moves, aiming a knob at a target, proposing a design."""

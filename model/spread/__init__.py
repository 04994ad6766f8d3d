"""Monte Carlo spread of a design over its tolerances, and its yield against its specs."""

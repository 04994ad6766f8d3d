"""What is computed from a solved stage: midband, response, transfer, load lines, hand estimate, power, warnings, and the ``analyse`` entry."""

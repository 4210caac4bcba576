"""One module per command; each has `run(args) -> exit code` and wires stages together."""

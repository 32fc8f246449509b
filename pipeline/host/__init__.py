"""The host: hook specs by phase, plugin manager, component protocols, parameters and validity, the stage table,
run configuration and the public contract checks for components."""

"""Mass on Measurements: materials, plate mass, assemblies, static unbalance."""

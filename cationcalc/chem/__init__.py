"""Pure chemistry (RDKit, NumPy): species, bonding, conformers, symmetry, thermochemistry, leaving groups,
ionization sites, solvolysis media, rate equations and the bundled published tables. No engine, no process, no file
beyond the package's own data."""

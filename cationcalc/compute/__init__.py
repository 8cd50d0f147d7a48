"""One species: settings and result models, optimisation, Hessian, the species pipeline, NEB barriers and the
arithmetic of HIA and heterolysis over species results."""

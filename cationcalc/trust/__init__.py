"""How far to trust a number: HIA calibration, uncertainties from stored residuals, the E_f / E calibrations and
the nucleofuge table."""

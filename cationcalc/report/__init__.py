"""Reading views, study output files (CSV, JSON, SDF, XYZ, provenance) and the HTML report with its figures."""

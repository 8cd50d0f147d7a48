"""The package version and the safety note every output carries (the bottom layer: imports nothing)."""

__version__ = "0.1.0"

SAFETY_NOTE = (
    "Screening estimates from semi-empirical quantum chemistry, not safety data: alkyl halides "
    "and sulfonates are alkylating agents, diazonium salts can detonate, superacids burn. Follow "
    "the SDS, local rules and licensed practice."
)

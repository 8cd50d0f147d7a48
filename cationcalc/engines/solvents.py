"""Solvent names: the user's words mapped to each solvation model's names.

The names are those for which GFN2-xTB's ALPB and GBSA models carry
published parameters (checked against tblite 0.8.0 and xtb-python 22.1: an
unknown name raises in tblite but silently runs in the gas phase in
xtb-python, so every name is validated here first).

Example
-------
>>> from cationcalc.engines.solvents import normalise_solvent
>>> normalise_solvent("CH2Cl2")
'dichloromethane'
>>> normalise_solvent("none") is None
True
"""

from __future__ import annotations

import difflib

#: canonical name -> ALPB name understood by tblite
ALPB_NAMES: dict[str, str] = {
    "acetone": "acetone",
    "acetonitrile": "acetonitrile",
    "aniline": "aniline",
    "benzaldehyde": "benzaldehyde",
    "benzene": "benzene",
    "dichloromethane": "ch2cl2",
    "chloroform": "chcl3",
    "carbon disulfide": "cs2",
    "dioxane": "dioxane",
    "dmf": "dmf",
    "dmso": "dmso",
    "diethyl ether": "ether",
    "ethanol": "ethanol",
    "ethyl acetate": "ethylacetate",
    "furan": "furan",
    "hexadecane": "hexadecane",
    "hexane": "hexane",
    "methanol": "methanol",
    "nitromethane": "nitromethane",
    "octanol": "octanol",
    "wet octanol": "woctanol",
    "phenol": "phenol",
    "toluene": "toluene",
    "thf": "thf",
    "water": "water",
}

#: canonical name -> GBSA name understood by tblite and xtb-python
GBSA_NAMES: dict[str, str] = {
    "acetone": "acetone",
    "acetonitrile": "acetonitrile",
    "benzene": "benzene",
    "dichloromethane": "ch2cl2",
    "chloroform": "chcl3",
    "carbon disulfide": "cs2",
    "dmf": "dmf",
    "dmso": "dmso",
    "diethyl ether": "ether",
    "hexane": "nhexane",
    "methanol": "methanol",
    "toluene": "toluene",
    "thf": "thf",
    "water": "water",
}

_ALIASES = {
    "h2o": "water",
    "ch2cl2": "dichloromethane",
    "dcm": "dichloromethane",
    "methylene chloride": "dichloromethane",
    "chcl3": "chloroform",
    "cs2": "carbon disulfide",
    "ether": "diethyl ether",
    "diethylether": "diethyl ether",
    "et2o": "diethyl ether",
    "etoh": "ethanol",
    "meoh": "methanol",
    "mecn": "acetonitrile",
    "ch3cn": "acetonitrile",
    "ethylacetate": "ethyl acetate",
    "etoac": "ethyl acetate",
    "n-hexane": "hexane",
    "nhexane": "hexane",
    "furane": "furan",
    "tetrahydrofuran": "thf",
    "dimethylformamide": "dmf",
    "dimethyl sulfoxide": "dmso",
    "dimethylsulfoxide": "dmso",
    "1,4-dioxane": "dioxane",
    "woctanol": "wet octanol",
    "1-octanol": "octanol",
    "meno2": "nitromethane",
    "phme": "toluene",
}

_GAS = {"", "none", "gas", "vacuum", "gas phase"}


def normalise_solvent(name: str | None) -> str | None:
    """Canonical solvent name, or None for the gas phase.

    Raises ValueError with the closest known names for an unknown solvent.
    """
    if name is None:
        return None
    key = " ".join(str(name).strip().lower().replace("_", " ").split())
    if key in _GAS:
        return None
    key = _ALIASES.get(key, key)
    if key in ALPB_NAMES:
        return key
    known = sorted(set(ALPB_NAMES) | set(_ALIASES))
    close = difflib.get_close_matches(key, known, n=3)
    hint = f"did you mean {', '.join(close)}? " if close else ""
    raise ValueError(
        f"unknown solvent {name!r}: {hint}use 'none' for the gas phase or one of: "
        + ", ".join(sorted(ALPB_NAMES))
    )


def check_gbsa_solvent(engine: str, solvent: str | None) -> None:
    """Refuse a solvent xtb-python has no GBSA parameters for (tblite's ALPB knows every listed solvent).

    ``solvent`` is a canonical name or None (gas phase); raises ValueError with the fix.
    """
    if engine == "xtb" and solvent is not None and solvent not in GBSA_NAMES:
        raise ValueError(f"solvent {solvent!r} has no GBSA parameters in xtb-python; use --engine "
                         f"tblite or one of: {', '.join(sorted(GBSA_NAMES))}")

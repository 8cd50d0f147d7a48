"""Solvolysis media by the names chemists write: ``80E20W``, ``80% ethanol``, ``ethanol/water 80:20``, ``97% TFE (w/w)``.

One medium, one row of ``data/solvolysis_media.csv``: its code in the trade's
notation (volume ratio of organic solvent to water, ``E`` ethanol, ``M``
methanol, ``A`` acetone, ``AN`` acetonitrile, ``T`` 2,2,2-trifluoroethanol,
``H`` hexafluoro-2-propanol, ``W`` water), and how each published table
(nucleofugality, ionizing power, solvent nucleophilicity) writes it.  Where a
table's entry only approximates the medium the row's ``notes`` say so, and
every record that uses it carries the note.

Example
-------
>>> from cationcalc.chem.media import medium
>>> [medium(t).code for t in ("80% ethanol", "ethanol/water 80:20", "80E20W", "97% TFE (w/w)", "acetone")]
['80E20W', '80E20W', '80E20W', '97T', 'A']
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

from cationcalc.chem.reference import load_table
from cationcalc.chem.species import InputError

#: one-letter (or two-letter) component codes of the trade's medium notation
COMPONENTS = {"ethanol": "E", "etoh": "E", "methanol": "M", "meoh": "M", "acetone": "A", "acetonitrile": "AN",
              "mecn": "AN", "ch3cn": "AN", "tfe": "T", "trifluoroethanol": "T", "2,2,2-trifluoroethanol": "T",
              "hfip": "H", "hexafluoroisopropanol": "H", "hexafluoro-2-propanol": "H"}


@dataclass(frozen=True)
class Medium:
    """A solvolysis medium and its key in each published table ('' where the table has no entry)."""

    code: str  #: the trade's notation, e.g. 80E20W
    name: str  #: in words, with the composition basis (v/v or w/w)
    nucleofugality_key: str
    ionizing_power_key: str
    nucleophilicity_key: str
    notes: str

    def label(self) -> str:
        return self.code if self.code == self.name else f"{self.code} ({self.name})"


@lru_cache(maxsize=1)
def media() -> tuple[Medium, ...]:
    """Every medium cationcalc knows, in table order."""
    return tuple(Medium(r["code"], r["name"], r["nucleofugality_medium"], r["ionizing_power_medium"],
                        r["nucleophilicity_medium"], r["notes"]) for r in load_table("solvolysis_media"))


def _normal(text: str) -> str:
    text = text.strip().lower().replace("％", "%")
    text = re.sub(r"\b(aqueous|aq\.?)\s+", "", text)
    text = re.sub(r"\s*([%:/(),-])\s*", r"\1", text)
    return re.sub(r"\s+", " ", text)


@lru_cache(maxsize=1)
def _index() -> dict[str, Medium]:
    index: dict[str, Medium] = {}
    for m in media():
        for key in (m.code, m.name, *[a for a in "".join(
                row["aliases"] for row in load_table("solvolysis_media") if row["code"] == m.code).split(";") if a]):
            index.setdefault(_normal(key), m)
    return index


def _from_composition(text: str) -> tuple[str, ...]:
    """'80% ethanol', 'ethanol/water 80:20' → ('80E20W', '80E'): the codes it may be tabulated under."""
    found = re.fullmatch(r"(\d{1,3})(?:\.0)?%([a-z0-9,-]+?)(?:\((?:v/v|w/w)\))?", text)
    if found and found.group(2) in COMPONENTS:
        organic, component = int(found.group(1)), COMPONENTS[found.group(2)]
    else:
        found = re.fullmatch(r"([a-z0-9,-]+?)[/:-](?:water|h2o)[ (]*(\d{1,3}):(\d{1,3})\)?(?:\((?:v/v|w/w)\))?",
                             text)
        if not found or found.group(1) not in COMPONENTS or int(found.group(2)) + int(found.group(3)) != 100:
            return ()
        organic, component = int(found.group(2)), COMPONENTS[found.group(1)]
    if not 0 < organic <= 100:
        return ()
    return (component,) if organic == 100 else (f"{organic}{component}{100 - organic}W", f"{organic}{component}")


def medium(text: str) -> Medium:
    """The medium a user named; InputError listing the known codes otherwise."""
    key = _normal(text or "")
    index = _index()
    if key in index:
        return index[key]
    codes = _from_composition(key)
    for m in media():
        if m.code in codes:
            return m
    raise InputError(f"unknown medium {text!r}; write it as the trade does (80E20W, '80% ethanol', "
                     f"'ethanol/water 80:20', '97% TFE (w/w)', acetone). Known: {', '.join(m.code for m in media())}")


__all__ = ["Medium", "medium", "media", "COMPONENTS"]

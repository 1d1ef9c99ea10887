"""Generate hfcore's basis-set library files from the basis-set-exchange package.

Run from the repository root (needs the ``dev`` extra)::

    python scripts/make_basis_library.py

Writes one JSON file per set to ``hfcore/basis/data/`` in hfcore's format
(``docs/basis-format.md``) and ``index.json`` listing them. Elements H-Ar
are taken wherever a set defines them. Shells are converted by
``hfcore.basis.library.shells_from_published`` (the same conversion used
when an unshipped set is looked up at run time); numbers keep their
published digits.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import basis_set_exchange as bse

from hfcore import elements
from hfcore.basis.library import published_citations, shells_from_published
from hfcore.basis.userfile import FORMAT_TAG

DATA_DIR = Path(__file__).resolve().parents[1] / "hfcore" / "basis" / "data"
MAX_Z = 18
INDEX_TAG = "hfcore-basis-index/1"
SOURCE_CITATION = {
    "text": "B. P. Pritchard, D. Altarawy, B. Didier, T. D. Gibson and T. L. Windus, "
    "A New Basis Set Exchange: An Open, Up-to-date Resource for the Molecular Sciences Community, "
    "J. Chem. Inf. Model. 59, 4814-4820 (2019)",
    "doi": "10.1021/acs.jcim.9b00725",
}


@dataclass(frozen=True)
class SetSpec:
    """What to ship for one set: names, lineage, convention, a short description."""

    name: str
    file: str
    aliases: tuple[str, ...]
    family: str
    default_spherical: bool
    description: str


POPLE = "pople"
CC = "correlation-consistent"
KARLSRUHE = "karlsruhe"
#: Auxiliary sets for density-fitted Coulomb and exchange, not orbital sets.
JK_FITTING = "jk-fitting"
#: Auxiliary sets for density-fitted MP2 (same shell limits as JK_FITTING).
MP2_FITTING = "mp2-fitting"

SETS = (
    SetSpec("3-21G", "3-21g.json", (), POPLE, False, "Split-valence set: inner shells of 3 Gaussians, valence split 2+1."),
    SetSpec("6-31G", "6-31g.json", (), POPLE, False, "Split-valence set: inner shells of 6 Gaussians, valence split 3+1."),
    SetSpec("6-31G*", "6-31g-d.json", ("6-31G(d)",), POPLE, False, "6-31G with one set of d polarisation functions on heavy atoms."),
    SetSpec("6-31G**", "6-31g-dp.json", ("6-31G(d,p)",), POPLE, False, "6-31G* with one set of p polarisation functions on hydrogen and helium."),
    SetSpec("6-31+G*", "6-31pg-d.json", ("6-31+G(d)",), POPLE, False, "6-31G* with diffuse s and p functions on heavy atoms."),
    SetSpec("6-311G**", "6-311g-dp.json", ("6-311G(d,p)",), POPLE, False, "Triple-split valence set with d polarisation on heavy atoms and p on hydrogen."),
    SetSpec("cc-pVDZ", "cc-pvdz.json", (), CC, True, "Correlation-consistent polarised valence double-zeta set."),
    SetSpec("cc-pVTZ", "cc-pvtz.json", (), CC, True, "Correlation-consistent polarised valence triple-zeta set."),
    SetSpec("cc-pVQZ", "cc-pvqz.json", (), CC, True, "Correlation-consistent polarised valence quadruple-zeta set."),
    SetSpec("aug-cc-pVDZ", "aug-cc-pvdz.json", (), CC, True, "cc-pVDZ augmented with one diffuse function per angular momentum."),
    SetSpec("cc-pV5Z", "cc-pv5z.json", (), CC, True, "Correlation-consistent polarised valence quintuple-zeta set (h functions on B-Ar)."),
    SetSpec("aug-cc-pVTZ", "aug-cc-pvtz.json", (), CC, True, "cc-pVTZ augmented with one diffuse function per angular momentum."),
    SetSpec("aug-cc-pVQZ", "aug-cc-pvqz.json", (), CC, True, "cc-pVQZ augmented with one diffuse function per angular momentum."),
    SetSpec("aug-cc-pV5Z", "aug-cc-pv5z.json", (), CC, True, "cc-pV5Z augmented with one diffuse function per angular momentum."),
    SetSpec("def2-SVP", "def2-svp.json", (), KARLSRUHE, True, "Split-valence set with polarisation, second generation of the Karlsruhe sets."),
    SetSpec("def2-TZVP", "def2-tzvp.json", (), KARLSRUHE, True, "Valence triple-zeta set with polarisation, second generation of the Karlsruhe sets."),
    SetSpec("def2-universal-JKFIT", "def2-universal-jkfit.json", (), JK_FITTING, True, "Fitting set for density-fitted Coulomb and exchange with any def2 orbital set."),
    SetSpec("cc-pVTZ-JKFIT", "cc-pvtz-jkfit.json", (), JK_FITTING, True, "Fitting set for density-fitted Coulomb and exchange with cc-pVTZ (and cc-pVDZ)."),
    SetSpec("cc-pVQZ-JKFIT", "cc-pvqz-jkfit.json", (), JK_FITTING, True, "Fitting set for density-fitted Coulomb and exchange with cc-pVQZ."),
    SetSpec("cc-pV5Z-JKFIT", "cc-pv5z-jkfit.json", (), JK_FITTING, True, "Fitting set for density-fitted Coulomb and exchange with cc-pV5Z."),
    SetSpec("cc-pVDZ-RIFIT", "cc-pvdz-rifit.json", ("cc-pVDZ-RI",), MP2_FITTING, True, "Fitting set for density-fitted MP2 with cc-pVDZ."),
    SetSpec("cc-pVTZ-RIFIT", "cc-pvtz-rifit.json", ("cc-pVTZ-RI",), MP2_FITTING, True, "Fitting set for density-fitted MP2 with cc-pVTZ."),
    SetSpec("cc-pVQZ-RIFIT", "cc-pvqz-rifit.json", ("cc-pVQZ-RI",), MP2_FITTING, True, "Fitting set for density-fitted MP2 with cc-pVQZ."),
    SetSpec("def2-SVP-RIFIT", "def2-svp-rifit.json", ("def2-SVP-RI",), MP2_FITTING, True, "Fitting set for density-fitted MP2 with def2-SVP."),
    SetSpec("def2-TZVP-RIFIT", "def2-tzvp-rifit.json", ("def2-TZVP-RI",), MP2_FITTING, True, "Fitting set for density-fitted MP2 with def2-TZVP."),
)


def _dump(value: object) -> str:
    return json.dumps(value, ensure_ascii=False)


def render(document: dict) -> str:
    """JSON text with one shell per line: readable diffs, compact files."""
    lines = ["{"]
    items = [(k, v) for k, v in document.items() if k != "elements"]
    for key, value in items:
        lines.append(f"  {_dump(key)}: {_dump(value)},")
    lines.append('  "elements": {')
    symbols = list(document["elements"])
    for i, symbol in enumerate(symbols):
        lines.append(f"    {_dump(symbol)}: [")
        shells = document["elements"][symbol]
        lines.extend(f"      {_dump(s)}" + ("," if j < len(shells) - 1 else "") for j, s in enumerate(shells))
        lines.append("    ]" + ("," if i < len(symbols) - 1 else ""))
    lines.append("  }")
    lines.append("}")
    return "\n".join(lines) + "\n"


def build_document(spec: SetSpec) -> dict:
    """The hfcore document of one set, H-Ar where the set defines them."""
    meta = bse.get_metadata()[bse.misc.transform_basis_name(spec.name)]
    version = meta["latest_version"]
    zs = sorted(int(z) for z in meta["versions"][version]["elements"] if int(z) <= MAX_Z)
    data = bse.get_basis(spec.name, elements=zs, header=False)
    table = {}
    for z in zs:
        element = data["elements"][str(z)]
        if element.get("ecp_potentials"):
            raise SystemExit(f"{spec.name}: element {z} needs an effective core potential")
        table[elements.symbol(z)] = shells_from_published(element["electron_shells"])
    return {
        "format": FORMAT_TAG,
        "name": spec.name,
        "aliases": list(spec.aliases),
        "family": spec.family,
        "default_spherical": spec.default_spherical,
        "description": spec.description,
        "citations": published_citations(bse.get_references(spec.name, elements=zs)),
        "source": {**SOURCE_CITATION, "package_version": bse.__version__, "set_version": version},
        "elements": table,
    }


def main() -> None:
    DATA_DIR.mkdir(parents=True, exist_ok=True)
    index = []
    for spec in SETS:
        document = build_document(spec)
        (DATA_DIR / spec.file).write_text(render(document), encoding="utf-8")
        index.append(
            {
                "name": spec.name,
                "aliases": list(spec.aliases),
                "file": spec.file,
                "family": spec.family,
                "default_spherical": spec.default_spherical,
                "elements": list(document["elements"]),
            }
        )
        print(f"{spec.file}: {len(document['elements'])} elements")
    text = json.dumps({"format": INDEX_TAG, "sets": index}, indent=1, ensure_ascii=False) + "\n"
    (DATA_DIR / "index.json").write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()

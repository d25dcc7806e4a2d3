"""The AGS4 side of an export: the standard dictionary's headings (from python-ags4's copy), the
unit and type descriptions the file lists, and how text and numbers are written (AGS Rule 1 ASCII,
nDP / nSF formats)."""

from __future__ import annotations

import functools
import math
import unicodedata
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path

AGS_VERSIONS = ("4.1.1", "4.2")
_DICTIONARY_FILES = {
    "4.1.1": "Standard_dictionary_v4_1_1.ags",
    "4.2": "Standard_dictionary_v4_2.ags",
}

UNIT_DESCRIPTIONS = {
    "m": "metre",
    "mm": "millimetre",
    "kPa": "kilopascal",
    "deg": "degree (angle)",
    "Mg/m3": "megagrams per cubic metre",
    "mm/min": "millimetres per minute",
    "%": "percentage",
    "yyyy-mm-dd": "year month day",
}
TYPE_DESCRIPTIONS = {
    "ID": "Unique identifier",
    "X": "Text",
    "XN": "Text or numeric",
    "DT": "Date time in international format",
    "PA": "Text listed in ABBR group",
    "0DP": "Value; required number of decimal places, 0",
    "1DP": "Value; required number of decimal places, 1",
    "2DP": "Value; required number of decimal places, 2",
    "3DP": "Value; required number of decimal places, 3",
    "2SF": "Value; required number of significant figures, 2",
}
SHBG_TYPES = {"SMALL SBOX": "Small shearbox", "LARGE SBOX": "Large shearbox"}
SHBG_CONDITIONS = {"UNDISTURBED": "Undisturbed", "REMOULDED": "Remoulded"}

# The headings this exporter fills, per group (dictionary order is applied on writing).
GROUP_HEADINGS: dict[str, tuple[str, ...]] = {
    "PROJ": ("PROJ_ID", "PROJ_NAME", "PROJ_LOC", "PROJ_CLNT", "PROJ_ENG"),
    "TRAN": (
        "TRAN_ISNO", "TRAN_DATE", "TRAN_PROD", "TRAN_STAT", "TRAN_DESC",
        "TRAN_AGS", "TRAN_RECV", "TRAN_DLIM", "TRAN_RCON", "TRAN_REM",
    ),
    "LOCA": ("LOCA_ID", "LOCA_NATE", "LOCA_NATN", "LOCA_GL", "LOCA_FDEP", "LOCA_STAR"),
    "SAMP": ("LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SAMP_BASE", "SAMP_DESC"),
    "SHBG": (
        "LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SPEC_REF", "SPEC_DPTH",
        "SPEC_DESC", "SPEC_PREP", "SHBG_TYPE", "SHBG_COND", "SHBG_CONS", "SHBG_PCOH",
        "SHBG_PHI", "SHBG_RCOH", "SHBG_RPHI", "SHBG_REM", "SHBG_METH", "SHBG_LAB", "TEST_STAT",
    ),
    "SHBT": (
        "LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SPEC_REF", "SPEC_DPTH",
        "SHBT_TESN", "SHBT_BDEN", "SHBT_DDEN", "SHBT_NORM", "SHBT_DISP", "SHBT_REVS",
        "SHBT_PEAK", "SHBT_RES", "SHBT_PDIS", "SHBT_RDIS", "SHBT_PDIN", "SHBT_RDIN",
        "SHBT_PDEN", "SHBT_IVR", "SHBT_MCI", "SHBT_MCF", "SHBT_HGT", "SHBT_CRIT", "SHBT_REM",
        "SHBT_PVST", "SHBT_RVST",
    ),
}  # fmt: skip
GROUP_ORDER = ("PROJ", "TRAN", "UNIT", "TYPE", "ABBR", "LOCA", "SAMP", "SHBG", "SHBT")


@dataclass(frozen=True)
class Heading:
    name: str
    unit: str
    type: str


@functools.cache
def dictionary_headings(version: str) -> dict[str, list[Heading]]:
    """Every group's headings in dictionary order, with unit and type, from python-ags4's copy
    of the AGS4 standard dictionary."""
    import python_ags4
    from python_ags4 import AGS4

    path = Path(python_ags4.__file__).parent / _DICTIONARY_FILES[version]
    tables, _ = AGS4.AGS4_to_dataframe(str(path))
    out: dict[str, list[Heading]] = {}
    for row in tables["DICT"].iloc[2:].itertuples(index=False):
        if row.DICT_TYPE == "HEADING":
            out.setdefault(row.DICT_GRP, []).append(
                Heading(row.DICT_HDNG, row.DICT_UNIT, row.DICT_DTYP)
            )
    return out


# --- text and numbers ---------------------------------------------------------------------------

_ASCII = str.maketrans(
    {
        "′": "'", "″": '"', "‘": "'", "’": "'", "“": '"', "”": '"', "–": "-", "—": "-",
        "−": "-", "×": "x", "°": " deg", "²": "2", "³": "3", "φ": "phi", "σ": "sigma",
        "τ": "tau", "ψ": "psi", "ρ": "rho", "≤": "<=", "≥": ">=", "±": "+/-", "µ": "u",
        "\r": " ", "\n": " ", "\t": " ",
    }
)  # fmt: skip


def ags_text(value: object) -> str:
    """Plain ASCII on one line (AGS Rule 1): symbols spelt out, accents dropped."""
    if value is None:
        return ""
    text = str(value).translate(_ASCII)
    text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    return " ".join(text.split())


def ags_number(value: float | Decimal | None, data_type: str) -> str:
    """Format a number for an AGS nDP / nSF field; blank for None or non-finite."""
    if value is None:
        return ""
    x = float(value)
    if not math.isfinite(x):
        return ""
    if data_type.endswith("DP"):
        places = int(data_type[:-2])
        text = f"{x:.{places}f}"
    elif data_type.endswith("SF"):
        figures = int(data_type[:-2])
        if x == 0:
            text = f"{0:.{figures - 1}f}"
        else:
            magnitude = math.floor(math.log10(abs(x)))
            rounded = round(x, figures - 1 - magnitude)
            magnitude = math.floor(math.log10(abs(rounded))) if rounded else magnitude
            text = f"{rounded:.{max(0, figures - 1 - magnitude)}f}"
    else:
        raise ValueError(f"not a numeric AGS type: {data_type}")
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0 else text

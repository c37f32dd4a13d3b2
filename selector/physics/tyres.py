"""Tyre designation, geometry and ratings (ISO 4000-1 / UN ECE R30).

- ``parse_tyre_size`` reads an ISO metric size designation such as ``205/55R16``.
- ``unloaded_diameter_m`` gives the free (unloaded) outer diameter D = d + 2 S Ra/100.
- ``SPEED_SYMBOL_KMH`` / ``speed_rating_kmh`` map speed symbols to the reference speed.
- ``LOAD_INDEX_KG`` / ``load_capacity_kg`` map load indices to the maximum load per tyre.

References
----------
ISO 4000-1, Passenger car tyres and rims, Part 1: Tyres (metric series).
UN ECE Regulation No. 30, pneumatic tyres for motor vehicles and their trailers.
"""

from __future__ import annotations

import re

import numpy as np

from selector.units import INCH_M

SPEED_SYMBOL_KMH: dict[str, float] = {
    **{f"A{i}": 5.0 * i for i in range(1, 9)},  # A1 5 km/h ... A8 40 km/h
    "B": 50.0, "C": 60.0, "D": 65.0, "E": 70.0, "F": 80.0, "G": 90.0,
    "J": 100.0, "K": 110.0, "L": 120.0, "M": 130.0, "N": 140.0, "P": 150.0,
    "Q": 160.0, "R": 170.0, "S": 180.0, "T": 190.0, "U": 200.0, "H": 210.0,
    "V": 240.0, "W": 270.0, "Y": 300.0,
}
"""Speed symbol -> reference speed [km/h] (ISO 4000-1 / UN ECE R30)."""

_LI_60_TO_130_KG = (
    250, 257, 265, 272, 280, 290, 300, 307, 315, 325,          # 60-69
    335, 345, 355, 365, 375, 387, 400, 412, 425, 437,          # 70-79
    450, 462, 475, 487, 500, 515, 530, 545, 560, 580,          # 80-89
    600, 615, 630, 650, 670, 690, 710, 730, 750, 775,          # 90-99
    800, 825, 850, 875, 900, 925, 950, 975, 1000, 1030,        # 100-109
    1060, 1090, 1120, 1150, 1180, 1215, 1250, 1285, 1320, 1360,  # 110-119
    1400, 1450, 1500, 1550, 1600, 1650, 1700, 1750, 1800, 1850,  # 120-129
    1900,                                                      # 130
)

LOAD_INDEX_KG: dict[int, float] = {60 + i: float(kg) for i, kg in enumerate(_LI_60_TO_130_KG)}
"""Load index -> maximum load per tyre [kg] (ISO 4000-1 / UN ECE R30 Annex 4).

Only load indices 60..130 are included: those are the values cross-checked for this project
against independent published reproductions of the table. Indices outside that range are rejected with a clear message.
"""

LOAD_INDEX_MIN = min(LOAD_INDEX_KG)
LOAD_INDEX_MAX = max(LOAD_INDEX_KG)

MAX_SIZE_TEXT = 64
"""Longest text `parse_tyre_size` reads [characters] (real designations have at most about 15)."""

_SIZE_RE = re.compile(
    r"""^\s*
    (?P<width>\d{3})\s*/\s*(?P<aspect>\d{2})      # section width [mm] / aspect ratio [%]
    \s*(?P<cons>Z?R)\s*                          # radial construction (ZR: above 240 km/h)
    (?P<rim>\d{2}(?:\.5)?)                       # rim diameter code [inch]
    \s*(?P<c>C)?\s*$                             # C: commercial (light truck) tyre
    """,
    re.IGNORECASE | re.VERBOSE,
)


def _size_problem(text: str) -> str:
    """Say why `text` is not an ISO metric size designation (for the error message)."""
    t = text.strip().upper()
    if not t:
        return "the size is empty"
    if "/" not in t:
        return "no '/' between section width and aspect ratio (sizes without an aspect ratio are not supported)"
    if "-" in t:
        return "'-' marks a diagonal (bias-ply) size; only radial sizes ('R') are supported"
    if re.match(r"^[A-Z]+\s*\d", t):
        return f"prefix {re.match(r'^[A-Z]+', t).group(0)!r} is not part of an ISO metric size (write e.g. 205/55R16)"
    if "R" not in t:
        return "no construction code 'R' (radial) before the rim diameter"
    if re.search(r"R\s*\d{2}(?:\.5)?C?\s+\(?\d{2,3}\s*/?\s*\d{0,3}\s*[A-Z]\d?\)?$", t):
        return ("it ends with a service description (load index and speed symbol); "
                "put those in the load_index and speed_symbol columns")
    return "it does not have the form width/aspect R rim"


def parse_tyre_size(text: str) -> tuple[float, float, float, str]:
    """Parse an ISO metric tyre size designation.

    Accepted forms (case-insensitive): ``205/55R16``, ``205/55 R16``, ``205/55ZR16``,
    ``225/50 ZR16``, ``235/65R16C``.

    Parameters
    ----------
    text : str
        Size designation. [-]

    Returns
    -------
    width_mm : float
        Nominal section width S. [mm]
    aspect_pct : float
        Nominal aspect ratio Ra. [%]
    rim_code_in : float
        Rim diameter code d. [inch]
    construction : str
        ``"R"`` or ``"ZR"``, with ``"C"`` appended for commercial (C-type) tyres,
        e.g. ``"RC"``. [-]

    Raises
    ------
    ValueError
        If `text` is not an ISO metric radial size designation; the message says why.
    """
    if not isinstance(text, str):
        raise ValueError(f"tyre size {text!r} is not text; expected e.g. 205/55R16")
    if len(text) > MAX_SIZE_TEXT:  # bounded before any regular expression sees the text
        raise ValueError(f"tyre size {text[:20]!r}...: longer than {MAX_SIZE_TEXT} characters; expected e.g. 205/55R16")
    m = _SIZE_RE.match(text)
    if m is None:
        raise ValueError(
            f"tyre size {text.strip()!r} is not an ISO metric size designation: {_size_problem(text)}; "
            "expected width/aspect R rim, e.g. 205/55R16, 205/55 R16, 225/50ZR16 or 235/65R16C"
        )
    width = float(m["width"])
    aspect = float(m["aspect"])
    rim = float(m["rim"])
    if width <= 0 or aspect <= 0 or rim <= 0:
        raise ValueError(f"tyre size {text.strip()!r}: width, aspect ratio and rim code must be > 0")
    construction = m["cons"].upper() + ("C" if m["c"] else "")
    return width, aspect, rim, construction


def unloaded_diameter_m(width_mm, aspect_pct, rim_code_in):
    """Free (unloaded) outer diameter of a tyre, D = d + 2 S Ra / 100.

    The rim diameter d is taken as exactly 25.4 mm per rim code (UN R30 tables round it to
    whole millimetres; the difference is at most 0.4 mm).

    Parameters
    ----------
    width_mm : array_like
        Nominal section width S. [mm]
    aspect_pct : array_like
        Nominal aspect ratio Ra. [%]
    rim_code_in : array_like
        Rim diameter code d. [inch]

    Returns
    -------
    numpy.ndarray or float
        Unloaded outer diameter D. [m]
    """
    w = np.asarray(width_mm, dtype=float)
    a = np.asarray(aspect_pct, dtype=float)
    d = np.asarray(rim_code_in, dtype=float)
    return d * INCH_M + 2.0 * (w * 1e-3) * a / 100.0


def _lookup(values, table, what, normalise):
    arr = np.asarray(values, dtype=object)
    flat = arr.reshape(-1)
    out = np.empty(flat.shape, dtype=float)
    for i, v in enumerate(flat):
        key = normalise(v)
        if key not in table:
            raise ValueError(what(v))
        out[i] = table[key]
    out = out.reshape(arr.shape)
    return float(out) if out.ndim == 0 else out


def _norm_symbol(s):
    return s.strip().upper() if isinstance(s, str) else s


def _norm_index(v):
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, float, np.integer, np.floating)):
        return None
    f = float(v)
    return int(f) if np.isfinite(f) and f == int(f) else None


def speed_rating_kmh(symbols):
    """Reference speed of tyre speed symbols (ISO 4000-1 / UN ECE R30).

    Parameters
    ----------
    symbols : str or array_like of str
        Speed symbols such as ``"H"`` or ``"A8"``; case and surrounding blanks are ignored. [-]

    Returns
    -------
    float or numpy.ndarray
        Reference speed. [km/h]

    Raises
    ------
    ValueError
        For an unknown symbol.
    """
    return _lookup(
        symbols, SPEED_SYMBOL_KMH,
        lambda v: f"unknown speed symbol {v!r}; known symbols: {', '.join(SPEED_SYMBOL_KMH)}",
        _norm_symbol,
    )


def load_capacity_kg(indices):
    """Maximum load per tyre for load indices (ISO 4000-1 / UN ECE R30 Annex 4).

    Parameters
    ----------
    indices : int or array_like of int
        Load indices; only LI 60..130 are tabulated here. [-]

    Returns
    -------
    float or numpy.ndarray
        Maximum load per tyre. [kg]

    Raises
    ------
    ValueError
        For a load index that is not a whole number or lies outside 60..130.
    """
    return _lookup(
        indices, LOAD_INDEX_KG,
        lambda v: (f"load index {v!r} is not supported; selector tabulates whole-number load indices "
                   f"{LOAD_INDEX_MIN}..{LOAD_INDEX_MAX} (ISO 4000-1)"),
        _norm_index,
    )


LOAD_SPEED_REDUCTION = {
    # symbol: (speed where the reduction starts [km/h], speed of the symbol [km/h], capacity there [-])
    "V": (210.0, 240.0, 0.91),
    "W": (240.0, 270.0, 0.85),
    "Y": (270.0, 300.0, 0.85),
}
"""Load capacity against speed for the high speed symbols (UN Regulation No. 30): the load index's
capacity applies up to the start speed and falls linearly to the given share at the symbol's speed.
V: 91 % at 240 km/h from 210 km/h and W: 85 % at 270 km/h from 240 km/h, linear in between (UN R30,
as reproduced by a handbook page on tyre load capacity); Y: 85 % at 300 km/h from 270 km/h (from
memory: the regulation leaves capacities above 270 km/h to agreement, this project applies the W
slope shifted by 30 km/h). Other symbols keep 100 % up to their reference speed."""


def load_capacity_factor(symbols, speed_kmh):
    """Share of the load-index capacity available at a vehicle speed (UN R30 speed reduction) [-].

    Parameters
    ----------
    symbols : str or array_like of str
        Speed symbols (case-insensitive). [-]
    speed_kmh : array_like
        Vehicle maximum speed. [km/h]

    Returns
    -------
    numpy.ndarray
        1 up to the start of the reduction, then linear down to the share at the symbol's speed
        (held constant beyond it: the speed-symbol check rejects such speeds anyway). [-]
    """
    sym = np.char.upper(np.asarray(symbols, dtype=str))
    v = np.asarray(speed_kmh, dtype=float)
    out = np.ones(np.broadcast_shapes(sym.shape, v.shape))
    for s, (v0, v1, share) in LOAD_SPEED_REDUCTION.items():
        on = sym == s
        if np.any(on):
            frac = np.clip((v - v0) / (v1 - v0), 0.0, 1.0)
            out = np.where(on, 1.0 - (1.0 - share) * frac, out)
    return out

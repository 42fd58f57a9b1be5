"""Standard values and quantity text: IEC 60063 series, SI prefixes, IEC 60062 RKM codes.

Every function raises ``ValueError`` with a short message about the text itself; the caller
adds the file and key. Imports only numpy and the standard library.

Quantity text, as read by :func:`parse_quantity`
-------------------------------------------------
* A plain number (int or float, not bool) is taken in base SI units.
* ``<number> [prefix] [unit]``, spaces allowed between the parts: ``4.7k``, ``100 nF``,
  ``1e-6``, ``2.2µ``, ``5%``, ``100ppm``. Prefixes: p n u µ μ m k M G (``M`` is mega, ``m``
  is milli); ``K`` is read as kilo only for a resistance. A dimensionless key takes prefixes
  too (``2k``); C, % and ppm take none.
* An IEC 60062 RKM code, for resistances and capacitances only: the letter stands where the
  decimal point goes and gives the multiplier. Resistors: R K k M G (``R47``, ``2R2``, ``4K7``,
  ``1M0``, ``100R``, ``10K0``). Capacitors: p n u µ μ m (``4n7``, ``p68``, ``1u0``). One
  tolerance letter may follow (F 1 %, G 2 %, J 5 %, K 10 %, M 20 %): ``4K7J``, ``4K7K``; the
  value ignores it and :func:`parse_rkm_tolerance` returns it.

The ambiguity rule. ``K`` and ``M`` are both multipliers and tolerance letters [std IEC 60062],
so a tolerance letter is accepted only after an RKM code whose letter sits *between* digits
(or is ``R``). After a plain multiplier it is rejected, never guessed:
``10K`` = 10 kohm for a resistance (common practice) and nothing may follow it but a unit;
``47KJ``, ``10KK``, ``10MJ``, ``100nJ`` are rejected as ambiguous; ``100K`` for a capacitance is
rejected (``K`` is no capacitance prefix and may be the 10 % letter). After a capacitor code a
lone ``F`` is the unit farad for the value, but :func:`parse_rkm_tolerance` rejects it.
"""
from __future__ import annotations

import math
import numbers
import re
from decimal import Decimal, DecimalException

import numpy as np

# --- IEC 60063 series ------------------------------------------------------------------------
_PRINTED = {  # [std IEC 60063] printed tables; they differ from the formula at
    # 2.7 3.0 3.3 3.6 3.9 4.3 4.7 8.2, so they cannot be computed
    "E3": (1.0, 2.2, 4.7),
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
}


def _computed(n: int) -> tuple[float, ...]:
    """E48/E96/E192: round(10**(i/n)) to three figures [std IEC 60063]. The one published
    exception is E192 index 185 = 9.20 (formula 9.19) [std]. No exception is known for E48 or
    E96 [std]/[mem]; the tests confirm both against an outside table."""
    vals = [round(10 ** (i / n), 2) for i in range(n)]
    if n == 192:
        vals[185] = 9.20
    return tuple(vals)


SERIES: dict[str, tuple[float, ...]] = {**_PRINTED, "E48": _computed(48), "E96": _computed(96),
                                        "E192": _computed(192)}
SERIES_TOLERANCE: dict[str, float] = {
    "E3": 0.40,  # [cp] +-40 %; the standard gives E3 no tolerance of its own
    "E6": 0.20, "E12": 0.10, "E24": 0.05, "E48": 0.02, "E96": 0.01, "E192": 0.005,  # [std]
}


def _series_key(name: str) -> str:
    key = str(name).strip().upper()
    if key not in SERIES:
        raise ValueError(f"unknown series '{name}'; known: {', '.join(SERIES)}")
    return key


def series_values(name: str, lo: float, hi: float) -> np.ndarray:
    """All values of series ``name`` in [lo, hi] (inclusive to 1e-9 relative), ascending.

    Each value is mantissa * 10**decade rounded to 12 significant figures, so 10 kohm is
    exactly 10000.0 and 4.7 nF is the float nearest 4.7e-9."""
    key = _series_key(name)
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo <= 0 or hi < lo:
        raise ValueError(f"series range needs 0 < min <= max, got min={lo:g}, max={hi:g}")
    decades = np.arange(math.floor(math.log10(lo)) - 1, math.floor(math.log10(hi)) + 2)
    raw = np.outer(10.0 ** decades, np.asarray(SERIES[key])).ravel()
    vals = np.array([float(f"{v:.12g}") for v in raw])
    keep = (vals >= lo * (1 - 1e-9)) & (vals <= hi * (1 + 1e-9))
    return np.sort(vals[keep])


def series_of(value: float) -> str | None:
    """The coarsest series (E3 first ... E192) holding ``value`` to 1e-9 relative, else None."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    if not math.isfinite(v) or v <= 0:
        return None
    scale = 10.0 ** np.arange(math.floor(math.log10(v)) - 1, math.floor(math.log10(v)) + 2)
    for key, mant in SERIES.items():
        if np.any(np.abs(np.outer(scale, mant) - v) <= 1e-9 * v):
            return key
    return None


def series_rank(values) -> np.ndarray:
    """For each value, the index in SERIES (0 = E3 ... 6 = E192) of the coarsest series holding
    it to 1e-9 relative, or len(SERIES) for none: :func:`series_of` over an array, vectorised."""
    v = np.asarray(values, dtype=float).ravel()
    rank = np.full(v.shape, len(SERIES))
    ok = np.isfinite(v) & (v > 0)
    if not ok.any():
        return rank
    w = v[ok]
    mant = w / 10.0 ** np.floor(np.log10(w))                  # in [1, 10), give or take rounding
    found = np.full(w.shape, len(SERIES))
    for i, key in reversed(list(enumerate(SERIES))):         # finest first; coarser overwrite
        table = np.sort(np.concatenate([np.asarray(SERIES[key]) * f for f in (0.1, 1.0, 10.0)]))
        j = np.clip(np.searchsorted(table, mant), 1, len(table) - 1)
        near = np.minimum(np.abs(table[j] - mant), np.abs(table[j - 1] - mant))
        found[near <= 1e-9 * mant] = i
    rank[ok] = found
    return rank


# --- quantity text -----------------------------------------------------------------------------
_PREFIX = {"p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3, "k": 3, "M": 6, "G": 9}  # [std SI]
_RES_LETTERS = {"R": 0, "K": 3, "k": 3, "M": 6, "G": 9}             # [std IEC 60062]
_CAP_LETTERS = {"p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3}  # u: [cp] ASCII for µ
_TOLERANCE = {"F": 0.01, "G": 0.02, "J": 0.05, "K": 0.10, "M": 0.20}  # [std IEC 60062]
_SPELLING = {"ohm": "ohm", "Ohm": "ohm", "ohms": "ohm", "Ohms": "ohm", "Ω": "ohm", "\u2126": "ohm",
             "F": "F", "V": "V", "A": "A", "Hz": "Hz", "s": "s", "W": "W",
             "C": "C", "°C": "C", "degC": "C", "%": "%", "ppm": "ppm",
             "ppm/K": "ppm/K", "ppm/C": "ppm/K", "ppm/°C": "ppm/K"}
_WHAT = {"ohm": "a resistance (ohm)", "F": "a capacitance (F)", "V": "a voltage (V)",
         "A": "a current (A)", "Hz": "a frequency (Hz)", "s": "a time (s)", "W": "a power (W)",
         "C": "a temperature (C)", "%": "a fraction (%)", "ppm": "a ratio in ppm",
         "ppm/K": "a temperature coefficient (ppm/K)", "": "a plain number"}
_ACCEPTS = {u: {u} for u in ("ohm", "F", "V", "A", "Hz", "s", "W", "C", "%")}
_ACCEPTS |= {"": {"%", "ppm"}, "ppm/K": {"ppm", "ppm/K"}}
_SCALE = {"%": -2, "ppm": -6, "ppm/K": -6}   # written unit -> power of ten to the base unit
_NO_PREFIX = {"C", "%", "ppm/K"}
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?", re.ASCII)   # ASCII digits only
_RKM = re.compile(r"([+-]?)(\d*)([RKkMGpnuµμm])(\d*)\s*(.*)", re.ASCII)
MAX_TEXT = 40    # characters of quantity text; longer is refused, and shown cut to this length
_HINT = "expected a number with an optional SI prefix and unit, e.g. '4.7k', '100nF', '4K7'"


def clip(text: str, n: int = MAX_TEXT) -> str:
    """`text` cut to `n` characters, saying how long it was, for quoting in a message."""
    text = str(text)
    return text if len(text) <= n else f"{text[:n]}... ({len(text):,} characters)"


def _bad(text: str, why: str) -> ValueError:
    return ValueError(f"'{clip(text)}' is not a quantity: {why}")


def _rkm_match(text: str):
    """The RKM match for ``text``, or None if it is not an RKM code."""
    m = _RKM.fullmatch(text)
    if m is None:
        return None
    _, whole, letter, frac, _ = m.groups()
    if letter == "R" and (whole or frac):
        return m
    return m if frac else None   # '10K', '100n' are plain multipliers, not codes


def _unit_of(text: str, written: str, unit: str) -> str:
    """Canonical unit of the ``written`` suffix, checked against the expected ``unit``."""
    canon = _SPELLING.get(written)
    if canon is None:
        raise _bad(text, f"cannot read '{written}'; {_HINT}")
    if canon not in _ACCEPTS[unit]:
        raise ValueError(f"'{text}' is {_WHAT[canon]} where {_WHAT[unit]} is expected")
    return canon


def _ambiguous(text: str) -> ValueError:
    return ValueError(f"'{text}' is ambiguous: a tolerance letter (F G J K M) may only follow an "
                      "RKM code such as 4K7J, where K and M cannot be read as multipliers; "
                      "write the value alone (e.g. '47k') and give the tolerance separately")


def _parse_rkm(text: str, m, unit: str) -> Decimal:
    sign, whole, letter, frac, rest = m.groups()
    if unit not in ("ohm", "F"):
        raise _bad(text, f"RKM codes are only for resistances and capacitances, not {_WHAT[unit]}")
    is_res = letter in _RES_LETTERS
    if is_res != (unit == "ohm"):
        kind = "resistance (ohm)" if is_res else "capacitance (F)"
        raise ValueError(f"'{text}' reads as a {kind} code where {_WHAT[unit]} is expected")
    is_tolerance = rest in _TOLERANCE and (is_res or rest != "F")   # '4n7F': F is the unit
    if rest and not is_tolerance:
        _unit_of(text, rest, unit)   # a unit after the code, or an error
    exp = (_RES_LETTERS if is_res else _CAP_LETTERS)[letter]
    return Decimal(f"{sign}{whole or '0'}.{frac or '0'}").scaleb(exp)


def _parse_suffix(text: str, rest: str, unit: str) -> tuple[int, str | None]:
    """(power of ten, canonical written unit or None) for what follows the number."""
    if rest in _SPELLING:
        canon = _unit_of(text, rest, unit)
        return _SCALE.get(canon, 0), canon
    head, tail = rest[0], rest[1:].lstrip()
    if head == "K":
        if unit == "ohm" and (tail == "" or _SPELLING.get(tail) == "ohm"):
            return 3, None
        if unit == "ohm" and tail in _TOLERANCE:
            raise _ambiguous(text)
        if unit == "F":
            raise _bad(text, "'K' is not a capacitance prefix and could be the 10 % tolerance "
                             "letter; write e.g. '100n' or '0.1u'")
        if unit == "C":
            raise _bad(text, "temperatures are in degrees Celsius, not kelvin")
        raise _bad(text, "'K' is not an SI prefix (kilo is 'k')")
    if head not in _PREFIX:
        raise _bad(text, f"cannot read '{rest}'; {_HINT}")
    if tail in ("G", "J", "K", "M") and unit in ("ohm", "F"):   # 'F' reads as the unit
        raise _ambiguous(text)
    canon = _unit_of(text, tail, unit) if tail else None
    if unit in _NO_PREFIX or canon in ("%", "ppm", "ppm/K", "C"):
        raise _bad(text, f"no SI prefix is allowed on {_WHAT[canon or unit]}")
    return _PREFIX[head], canon


def parse_quantity(text: str | int | float, unit: str, *, allow_negative: bool = False) -> float:
    """The value of ``text`` in base SI units (see the module docstring for the grammar).

    unit: what the key expects, one of "ohm", "F", "V", "A", "Hz", "s", "W", "C" (degrees
    Celsius), "" (dimensionless), "%" (returns a fraction) or "ppm/K" (returns 1/K). Zero is
    allowed; negative values only with ``allow_negative=True``."""
    if unit not in _WHAT or unit == "ppm":
        raise ValueError(f"unknown unit '{unit}'")
    if isinstance(text, (bool, np.bool_)):
        raise ValueError(f"{str(text).lower()} is not a quantity; {_HINT}")
    if isinstance(text, numbers.Real):
        value, shown = float(text), repr(text)
    elif isinstance(text, str):
        shown = text.strip().replace("\u2212", "-")
        if not shown:
            raise ValueError(f"an empty text is not a quantity; {_HINT}")
        if len(shown) > MAX_TEXT:
            raise ValueError(f"'{clip(shown)}' is too long for a quantity (limit {MAX_TEXT} characters)")
        if shown.lstrip("+-").lower() in ("nan", "inf", "infinity"):
            raise ValueError(f"'{shown}' is not a finite number")
        m = _rkm_match(shown)
        if m is not None:
            dec = _parse_rkm(shown, m, unit)
        else:
            num = _NUMBER.match(shown)
            if num is None:
                raise _bad(shown, _HINT)
            rest = shown[num.end():].lstrip()
            exp = _parse_suffix(shown, rest, unit)[0] if rest else 0
            try:
                dec = Decimal(num.group()).scaleb(exp)
            except DecimalException:
                raise _bad(shown, "the number is out of range") from None
        value = float(dec)
    else:
        raise ValueError(f"a {type(text).__name__} is not a quantity; {_HINT}")
    if not math.isfinite(value):
        raise ValueError(f"'{shown}' is not a finite number")
    if value < 0 and not allow_negative:
        raise ValueError(f"'{shown}' is negative; a value of zero or more is expected here")
    return value + 0.0   # no negative zero


def parse_rkm_tolerance(text) -> float | None:
    """The tolerance letter of an RKM code as a fraction ('4K7J' -> 0.05), or None if the text
    is not an RKM code or has no letter. Use after :func:`parse_quantity` accepted the text.
    Raises ValueError for a lone 'F' after a capacitor code (unit farad or 1 %?)."""
    if not isinstance(text, str):
        return None
    t = text.strip()
    m = _rkm_match(t)
    if m is None or m.group(5) not in _TOLERANCE:
        return None
    if m.group(5) == "F" and m.group(3) in _CAP_LETTERS:
        raise ValueError(f"'{t}' is ambiguous: 'F' after a capacitor code may be the unit farad "
                         "or the 1 % tolerance letter")
    return _TOLERANCE[m.group(5)]


# --- formatting --------------------------------------------------------------------------------
_SYMBOL = {"ohm": "Ω", "C": "°C"}


def unit_symbol(unit: str) -> str:
    """The symbol people read for a parse unit: "ohm" -> "Ω", "C" -> "°C", others as they are."""
    return _SYMBOL.get(unit, unit)


def symbol_unit(symbol: str) -> str:
    """The parse unit of a symbol people read (the inverse of unit_symbol): "°C" -> "C"."""
    return {v: k for k, v in _SYMBOL.items()}.get(symbol, symbol)
_OUT_PREFIX = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}


def _sci(value: float, digits: int) -> tuple[str, str, int]:
    """(sign, significant digits, decimal exponent) of ``value`` rounded to ``digits``."""
    mant, exp = f"{abs(value):.{max(1, digits) - 1}e}".split("e")
    return ("-" if value < 0 else ""), mant.replace(".", ""), int(exp)


def _place(ds: str, point: int) -> str:
    """Digits ``ds`` with the decimal point after ``point`` digits, trailing zeros stripped."""
    if point <= 0:
        ds, point = "0" * (1 - point) + ds, 1
    ds = ds.ljust(point, "0")
    whole, frac = ds[:point], ds[point:].rstrip("0")
    return whole + ("." + frac if frac else "")


def _e_notation(ds: str, exp: int) -> str:
    return _place(ds, 1) + f"e{exp}"


def format_eng(value: float, unit: str = "", digits: int = 3) -> str:
    """``value`` in engineering notation with an SI prefix: 4700 -> "4.7 k", 1e-7 -> "100 n",
    4700 with "ohm" -> "4.7 kΩ". "%", "ppm/K" and "C" print without prefix ("5 %",
    "100 ppm/K", "25 °C"). NaN -> "". The text reads back with :func:`parse_quantity`."""
    v = float(value)
    if math.isnan(v):
        return ""
    symbol = unit_symbol(unit)
    if math.isinf(v):
        return ("-inf" if v < 0 else "inf") + (f" {symbol}" if symbol else "")
    if v == 0:
        return "0" + (f" {symbol}" if symbol else "")
    sign, ds, exp = _sci(v, digits)
    if unit in _NO_PREFIX:
        exp -= _SCALE.get(unit, 0)   # 0.05 -> 5 %
        num = _place(ds, exp + 1) if -6 <= exp < 15 else _e_notation(ds, exp)
        return f"{sign}{num} {symbol}"
    e3 = 3 * (exp // 3)
    if e3 in _OUT_PREFIX:
        num, prefix = _place(ds, exp - e3 + 1), _OUT_PREFIX[e3]
    else:
        num, prefix = _e_notation(ds, exp), ""
    tail = prefix + symbol
    return f"{sign}{num}" + (f" {tail}" if tail else "")


def rkm_code(value: float, unit: str) -> str:
    """IEC 60062 RKM code to three figures: 4700 ohm -> "4K7", 0.47 -> "R47", 1e6 -> "1M0",
    100 -> "100R"; 4.7e-9 F -> "4n7", 1e-7 -> "100n", 6.8e-13 -> "p68", 1e-6 -> "1u0"
    (the standard prints µ; "u" is the common ASCII practice [cp])."""
    v = float(value)
    if unit not in ("ohm", "F"):
        raise ValueError(f"RKM codes are for resistances and capacitances, not '{unit}'")
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"no RKM code for {v:g}: a positive finite value is needed")
    _, ds, exp = _sci(v, 3)
    if unit == "ohm":
        e3 = min(max(3 * (exp // 3), 0), 9)
        letter = {0: "R", 3: "K", 6: "M", 9: "G"}[e3]
    else:
        if exp >= 0:
            raise ValueError(f"no RKM code for {v:g} F: capacitor codes stop below 1 F")
        e3 = max(3 * (exp // 3), -12)
        letter = {-12: "p", -9: "n", -6: "u", -3: "m"}[e3]
    num = _place(ds, exp - e3 + 1)
    if "." in num:
        whole, frac = num.split(".")
        return whole.lstrip("0") + letter + frac
    if len(num) == 1:
        return num + letter + "0"
    return num + letter

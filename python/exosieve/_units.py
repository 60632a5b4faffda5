"""Units beyond the case tables' built-in words, read by astropy (imported only when needed).

The package's SI unit strings (``"kg"``, ``"W m-2"``, ``"m-1 s-1"``, ...) are ones astropy
parses, but for ``"particles"``: a count, which takes dimensionless units (``1e30``) and amounts
of substance (``kmol``, times the Avogadro constant).
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

from . import constants as c


class UnknownUnit(ValueError):
    """A unit text that is not a unit (or astropy, needed to read it, is not installed)."""


class WrongDimension(ValueError):
    """A unit that does not measure the quantity; the message says what it measures."""


def _astropy_units() -> Any:
    try:
        import astropy.units as u
    except ImportError:
        raise UnknownUnit(
            "units other than the built-in words need astropy (pip install astropy)"
        ) from None
    return u


def parse(text: str) -> Any:
    """The astropy unit `text` names; UnknownUnit with astropy's reason (and its suggestion of
    the closest names) when it names none."""
    u = _astropy_units()
    try:
        return u.Unit(text)
    except ValueError as err:
        # astropy's reason, without where it failed to parse or how to define custom units
        reason = str(err).split(" If this is meant")[0].split("did not parse as unit: ")[-1]
        raise UnknownUnit("astropy: " + re.sub(r"^At col \d+, ", "", reason).strip()) from None


@lru_cache(maxsize=256)
def factor(text: str, si: str | None) -> float:
    """The factor taking values in the unit `text` to the SI unit `si` (the package's unit
    string; None: the unit's own SI decomposition). UnknownUnit when astropy cannot read
    `text`, WrongDimension when it does not measure `si` or is not a multiple of it (an
    offset scale such as deg_C)."""
    return unit_factor(parse(text), si, text)


def unit_factor(given: Any, si: str | None, text: str = "") -> float:
    """`factor` for the astropy unit `given` itself (named `text` in messages)."""
    u = _astropy_units()
    text = text or str(given)
    try:
        if si is None:
            scale = float(given.si.scale)
        elif si == "particles" and given.physical_type == "amount of substance":
            scale = float(given.to(u.mol)) * c.N_A
        else:
            scale = float(given.to(u.one if si in ("1", "particles") else u.Unit(si)))
    except u.UnitsError:
        kind = str(given.physical_type)
        target = u.one if si in (None, "1", "particles") else u.Unit(si)
        if si is not None and kind != "unknown" and kind == str(target.physical_type):
            raise WrongDimension(f"'{text}' is not a multiple of {si} (an offset scale)") from None
        raise WrongDimension(f"'{text}' measures {kind}" if kind != "unknown" else "") from None
    if not (math.isfinite(scale) and scale > 0.0):
        raise WrongDimension(f"'{text}' is {scale:g} {si}, not a positive multiple")
    return scale


def exact_text(given: Any) -> str | None:
    """The text astropy writes for the unit `given` ("1" for dimensionless) when it reads back
    as exactly that unit (``1.23457e+17 / m3`` does not), else None."""
    text = str(given.to_string()) or "1"
    try:
        return text if float(parse(text).to(given)) == 1.0 else None
    except ValueError:  # a unit astropy does not enable by default (imperial), an offset
        return None

"""Name → long-wavelength correction: ``"radiative"``, ``"kelly"`` and ``"moroz"``."""

from .._errors import InvdesignError
from .base import LongWavelengthCorrection
from .kelly import KellyMLWA
from .moroz import MorozDynamic
from .radiative import RadiativeOnly

#: the built-in corrections, by registry key
CORRECTIONS: dict[str, LongWavelengthCorrection] = {
    c.name: c for c in (RadiativeOnly(), KellyMLWA(), MorozDynamic())
}


def get_correction(correction) -> LongWavelengthCorrection:
    """Resolve a correction given by name (str) or as a ``LongWavelengthCorrection`` instance.

    Raises:
      InvdesignError: unknown name (the message lists the known ones).
    """
    if isinstance(correction, LongWavelengthCorrection):
        return correction
    try:
        return CORRECTIONS[correction]
    except (KeyError, TypeError):
        raise InvdesignError(
            f"unknown long-wavelength correction {correction!r}; choose one of "
            f"{', '.join(map(repr, CORRECTIONS))}"
        ) from None

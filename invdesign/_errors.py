"""Errors raised for a user's mistake. The CLI turns these into one clear message, never a traceback."""


class InvdesignError(ValueError):
    """Base class: something the user supplied is wrong; the message says what and how to fix it."""


class DesignError(InvdesignError):
    """A design file or design dictionary is malformed or physically invalid."""


class MaterialError(InvdesignError):
    """A material definition is malformed, or a wavelength lies outside its data."""


class SpecError(InvdesignError):
    """A specification, fab rule deck or run configuration is malformed or cannot be met."""

from . import _jaxsetup  # noqa: F401

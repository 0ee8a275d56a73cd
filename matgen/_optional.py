"""One helper for optional heavy dependencies (MaterialX, mitsuba, dask, usd-core, opencolorio).

Import them, or say how to install them.
"""

from __future__ import annotations

import importlib

from matgen.errors import DependencyError

_EXTRAS = {
    "MaterialX": "materialx",
    "mitsuba": "validate",
    "dask": "dask",
    "distributed": "dask",
    "iadpython": "test",
    "miepython": "test",
    "pxr": "usd",
    "PyOpenColorIO": "ocio",
}


def require(module: str, purpose: str):
    """Import ``module`` or raise :class:`DependencyError` naming the pip extra that provides it.

    Parameters
    ----------
    module : str
        Importable module name, e.g. ``"MaterialX"``.
    purpose : str
        What the caller wanted to do, for the message ("write MaterialX documents").

    """
    try:
        return importlib.import_module(module)
    except ImportError as exc:
        extra = _EXTRAS.get(module.split(".")[0])
        hint = f'pip install "matgen[{extra}]"' if extra else f"pip install {module}"
        raise DependencyError(
            f"{purpose} needs the optional package '{module}' ({exc}); install it with: {hint}"
        ) from exc

"""Optional parts of tricharge (pip "extras") and how to install a missing one.

Commands that need an extra check for it before any long work starts, so a user learns
about a missing picture library in a second, not after a solve. The install hint fits
how tricharge itself was installed: from a checkout (then pip must be pointed at that
folder; the package is not on a registry under our name) or from a registry.
"""

from __future__ import annotations

import importlib.util
import json

from .errors import MissingDependency

#: Extra -> the modules it provides (names as imported).
EXTRAS = {"viz": ("pyvista", "matplotlib"), "sweep": ("distributed",), "cad": ("gmsh",)}


def _installed_from() -> tuple[str | None, bool]:
    """(folder tricharge was installed from, editable?) from pip's ``direct_url.json``
    (PEP 610), or (None, False) when it came from a registry or cannot be told."""
    from importlib import metadata
    from urllib.parse import unquote, urlparse

    try:
        text = metadata.distribution("tricharge").read_text("direct_url.json")
    except metadata.PackageNotFoundError:
        return None, False
    if not text:
        return None, False
    try:
        record = json.loads(text)
    except ValueError:
        return None, False
    url = urlparse(record.get("url", ""))
    if url.scheme != "file":
        return None, False
    return unquote(url.path), bool(record.get("dir_info", {}).get("editable"))


def install_hint(extra: str) -> str:
    """The pip command that adds ``extra`` to this installation.

    >>> install_hint("viz").startswith("pip install")
    True
    """
    folder, editable = _installed_from()
    if folder is None:
        return f'pip install "tricharge[{extra}]"'
    return f'pip install {"-e " if editable else ""}"{folder}[{extra}]"'


def missing(extra: str) -> list[str]:
    """Modules of ``extra`` that cannot be imported here."""
    return [name for name in EXTRAS[extra] if importlib.util.find_spec(name) is None]


def require(extra: str, feature: str) -> None:
    """Raise :class:`MissingDependency` naming ``feature``, the missing modules and the
    install command when ``extra`` is not fully installed."""
    absent = missing(extra)
    if absent:
        raise MissingDependency(f"{feature} needs {' and '.join(absent)}, which {'is' if len(absent) == 1 else 'are'} "
                                f"not installed: {install_hint(extra)}")

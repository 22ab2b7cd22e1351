"""Whether the tests run in continuous integration: one rule for every test module."""

from __future__ import annotations

import os


def in_ci(environ: dict[str, str] | None = None) -> bool:
    """True when ``CI`` is set to anything but empty, ``false`` or ``0`` (any case).

    CI services set ``CI=true``, some ``CI=1`` or ``CI=yes``; a developer switches it off with
    ``CI=false`` or ``CI=0``.

    >>> in_ci({"CI": "1"}), in_ci({"CI": "True"}), in_ci({"CI": "false"}), in_ci({})
    (True, True, False, False)
    """
    value = (os.environ if environ is None else environ).get("CI", "").strip().lower()
    return value not in ("", "false", "0")

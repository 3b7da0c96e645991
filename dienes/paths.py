"""Where the workflow files live: the source checkout, or the copy an installed
package carries under <prefix>/share/dienes (pip install . without -e)."""

from __future__ import annotations

import sys
from pathlib import Path

_CHECKOUT = Path(__file__).resolve().parent.parent


def workflow_root() -> Path:
    """The directory that holds Snakefile, workflow/ and config/."""
    if (_CHECKOUT / "Snakefile").is_file() and (_CHECKOUT / "config" / "schema.yaml").is_file():
        return _CHECKOUT
    # an installed package: <prefix>/share/dienes, or beside the package (pip install --target)
    for prefix in (sys.prefix, sys.base_prefix, _CHECKOUT):
        candidate = Path(prefix) / "share" / "dienes"
        if (candidate / "Snakefile").is_file():
            return candidate
    return _CHECKOUT

"""The names of the score recipe's parts, in a module that loads nothing else.

The command line's help lists them, and `--help` must start without pydantic or numpy.
"""

from __future__ import annotations

PART_NAMES: tuple[str, ...] = ("expertise", "text", "topic", "bid")
"""The recipe's parts, in the order reports show them."""

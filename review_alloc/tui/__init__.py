"""The terminal app (Textual). Only this package imports `textual`."""

from review_alloc.tui.app import ReviewAllocApp, make_app

__all__ = ["ReviewAllocApp", "make_app"]

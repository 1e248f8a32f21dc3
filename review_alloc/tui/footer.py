"""`KeysFooter`: Textual's footer, rebuilt only when the keys it shows have changed.

Textual's footer builds its key widgets anew whenever the focused widget changes, even when
the keys are the same (from a table to its pair list, into a dialog's next field); on the
1,500-paper sample that was about a third of the work of such a key press.
"""

from __future__ import annotations

from textual.screen import Screen
from textual.widgets import Footer

Shown = tuple[tuple[object, ...], ...]
"""What the footer draws: per key shown, everything its key widget is made from."""


class KeysFooter(Footer):
    """A footer that skips rebuilding when the keys, their words and states are unchanged."""

    def __init__(self) -> None:
        super().__init__()
        self._shown: Shown | None = None

    def _keys_shown(self, screen: Screen) -> Shown:
        """The shown bindings as the footer would lay them out (the palette key included)."""
        app = self.app
        out: list[tuple[object, ...]] = []
        for key, (_node, binding, enabled, tooltip) in screen.active_bindings.items():
            if binding.show or key == app.COMMAND_PALETTE_BINDING:
                out.append(
                    (
                        key,
                        binding.key,
                        app.get_key_display(binding),
                        binding.description,
                        binding.action,
                        binding.group,
                        binding.show,
                        enabled,
                        tooltip,
                        binding.tooltip,
                    )
                )
        return tuple(out)

    def bindings_changed(self, screen: Screen) -> None:
        """Rebuild only when what is shown changed (and, as Textual does, when attached)."""
        if self.is_attached and screen is self.screen and screen.app.app_focus:
            shown = self._keys_shown(screen)
            if shown == self._shown:
                return
            self._shown = shown
        super().bindings_changed(screen)

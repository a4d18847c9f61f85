"""The key line at the bottom of every screen: Textual's Footer, rebuilt only when it changes.

Textual's Footer rebuilds its key widgets every time the screen says its bindings may have
changed, which happens on every focus change and several times while a screen opens (eleven
rebuilds, each followed by a layout pass, when the instrument editor opened). This one waits
for the screen to settle (one rebuild for a burst of signals) and skips the rebuild when the
keys it would show are the ones already shown. What it shows is Textual's Footer, unchanged.
"""

from __future__ import annotations

from textual.screen import Screen
from textual.widgets import Footer as _TextualFooter


class Footer(_TextualFooter):
    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self._rebuild_pending = False
        self._shown: tuple | None = None

    def _keys_shown(self) -> tuple:
        """What compose() would show: every shown binding with its key, label and state."""
        app = self.app
        keys = tuple(
            (binding.key, app.get_key_display(binding), binding.description, binding.action, enabled,
             tooltip, binding.group)
            for (_, binding, enabled, tooltip) in self.screen.active_bindings.values()
            if binding.show or binding.action == "command_palette"
        )
        return keys, self.show_command_palette, self.compact

    def bindings_changed(self, screen: Screen) -> None:
        self._bindings_ready = True
        if not screen.app.app_focus:
            return
        if self.is_attached and screen is self.screen and not self._rebuild_pending:
            self._rebuild_pending = True
            self.call_after_refresh(self._rebuild_if_changed)

    async def rebuild_now(self) -> None:
        """Bring the keys shown up to date at once (e.g. for a screen about to be shown again,
        whose bindings may not have been announced yet)."""
        self._bindings_ready = True
        await self._rebuild_if_changed()

    async def _rebuild_if_changed(self) -> None:
        self._rebuild_pending = False
        if not self.is_attached:
            return
        shown = self._keys_shown()
        if shown == self._shown:
            return
        self._shown = shown
        await self.recompose()


__all__ = ["Footer"]

"""The key line at the bottom of every screen: Textual's Footer, rebuilt only when it changes.

Textual's Footer rebuilds its key widgets every time the screen says its bindings may have
changed, which happens on every focus change and several times while a screen opens (eleven
rebuilds, each followed by a layout pass, when the instrument editor opened). This one waits
for the screen to settle (one rebuild for a burst of signals), skips the rebuild when the
keys it would show are the ones already shown, and greys or ungreys a key in place when only
keys' enabled states changed. What it shows is Textual's Footer, unchanged.
"""

from __future__ import annotations

from textual.screen import Screen
from textual.widgets import Footer as _TextualFooter
from textual.widgets._footer import FooterKey


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
        if self._shown is not None and self._enable_in_place(self._shown, shown):
            self._shown = shown
            return
        self._shown = shown
        await self.recompose()

    def _enable_in_place(self, before: tuple, after: tuple) -> bool:
        """When only keys' enabled states changed (an editor's "Add entry" on a section with or
        without a list), grey or ungrey the keys shown instead of building them all again (a
        rebuild costs a layout and a paint after the screen's own). Returns False (nothing
        done) when anything else changed or a key cannot be matched."""
        def without_state(shown: tuple) -> tuple:
            keys, palette, compact = shown
            return tuple(k[:4] + k[5:] for k in keys), palette, compact

        if without_state(before) != without_state(after):
            return False
        enabled: dict[str, bool] = {}
        for key, _display, _description, action, state, _tooltip, _group in after[0]:
            enabled.setdefault(action, bool(state))  # the footer shows an action's first binding
        keys = [k for k in self.query(FooterKey) if not k.has_class("-command-palette")]
        if any(k.action not in enabled or not hasattr(k, "_disabled") for k in keys):
            return False
        for k in keys:
            off = not enabled[k.action]
            if k._disabled != off:
                k._disabled = off  # what the key checks when clicked (Textual's FooterKey)
                k.set_class(off, "-disabled")
        return True


__all__ = ["Footer"]

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

    def compose(self):
        # Textual's Footer shows nothing until the screen first says its bindings changed, and
        # then builds its keys a second time (a layout and paint on every screen opened). The
        # keys are known as soon as the footer is built: show them, and record what is shown,
        # so that first signal finds nothing to change.
        if not self._bindings_ready:
            try:
                self._shown = self._keys_shown()
            except Exception:  # the screen cannot say yet: wait for its signal, as Textual does
                self._shown = None
            else:
                self.set_reactive(_TextualFooter._bindings_ready, True)
        else:
            self._shown = self._keys_shown()
        yield from super().compose()

    def bindings_changed(self, screen: Screen) -> None:
        self._bindings_ready = True
        if not screen.app.app_focus:
            return
        if self.is_attached and screen is self.screen and not self._rebuild_pending:
            self._rebuild_pending = True
            self.call_after_refresh(self._rebuild_if_changed)

    async def _rebuild_if_changed(self) -> None:
        self._rebuild_pending = False
        if not self.is_attached:
            return
        shown = self._keys_shown()
        if shown == self._shown:
            return
        old, self._shown = self._shown, shown
        if old is not None and self._enable_in_place(old, shown):
            return
        await self.recompose()

    #: where a key's enabled state sits in the tuples of `_keys_shown`
    _ENABLED = 4

    def _enable_in_place(self, old: tuple, new: tuple) -> bool:
        """When only keys' enabled states changed (e.g. "Add entry" in a section with a list),
        change those keys as Textual's Footer draws them (the -disabled class) instead of
        building every key again. False when anything else changed."""
        (old_keys, *old_rest), (new_keys, *new_rest) = old, new
        if old_rest != new_rest or len(old_keys) != len(new_keys):
            return False
        i = self._ENABLED
        changed = {}
        for a, b in zip(old_keys, new_keys):
            if a[:i] + a[i + 1:] != b[:i] + b[i + 1:]:
                return False
            if a[i] != b[i]:
                changed[(b[0], b[3])] = b[i]
        widgets = {(w.key, w.action): w for w in self.query(FooterKey)}
        if not all(k in widgets for k in changed):
            return False
        for k, enabled in changed.items():
            widget = widgets[k]
            widget._disabled = not enabled
            widget.set_class(not enabled, "-disabled")
        return True


__all__ = ["Footer"]

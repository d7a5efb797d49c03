"""Entries of the command list (Ctrl+P): every key's action, and direct choices of
temperament, tonic and pitch standard."""

from __future__ import annotations

from functools import partial

from textual.command import DiscoveryHit, Hit, Hits, Provider


class BenchCommands(Provider):
    """Searches the app's :meth:`~bench.ui.app.BenchApp.palette_entries`."""

    def _entries(self):
        entries = getattr(self.app, "palette_entries", None)
        return list(entries()) if entries is not None else []

    async def discover(self) -> Hits:
        for name, callback, help_text in self._entries():
            yield DiscoveryHit(name, callback, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for name, callback, help_text in self._entries():
            score = matcher.match(name)
            if score > 0:
                yield Hit(score, matcher.highlight(name), partial(callback), text=name, help=help_text)

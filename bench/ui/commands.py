"""Entries of the command list (Ctrl+P): every key's action, and direct choices of
temperament, tonic and pitch standard."""

from __future__ import annotations

from collections.abc import Callable
from functools import partial
from typing import TYPE_CHECKING

from textual.command import DiscoveryHit, Hit, Hits, Provider

if TYPE_CHECKING:
    from bench.ui.app import BenchApp


class BenchCommands(Provider):
    """Searches the app's :meth:`~bench.ui.app.BenchApp.palette_entries`."""

    @property
    def bench_app(self) -> BenchApp:
        """The app whose entries are listed (only :class:`~bench.ui.app.BenchApp` registers this provider)."""
        # imported here, not on top: bench.ui.app imports this module
        from bench.ui.app import BenchApp

        app = self.app
        if not isinstance(app, BenchApp):
            raise TypeError(f"BenchCommands lists the entries of a BenchApp, not of {type(app).__name__}")
        return app

    def _entries(self) -> list[tuple[str, Callable[[], object], str]]:
        return list(self.bench_app.palette_entries())

    async def discover(self) -> Hits:
        for name, callback, help_text in self._entries():
            yield DiscoveryHit(name, callback, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for name, callback, help_text in self._entries():
            score = matcher.match(name)
            if score > 0:
                yield Hit(score, matcher.highlight(name), partial(callback), text=name, help=help_text)

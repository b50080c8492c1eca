"""Keys typed in a burst: an action bound to a key runs after the keys typed before it.

The app hands each key to the focused widget as it takes the key from its queue; the
widget handles it later, from its own queue.  A binding's action runs at once, when the
app takes ITS key (a priority binding, or a screen's binding reached without a widget
in between), so without waiting it could read a value before the keys typed ahead of
it reached the field (F5 keeping "7" of "7.33"), clear a form under them (Ctrl+N), or
open the row the cursor was on before the arrows typed ahead of Enter moved it.
"""

from __future__ import annotations

import asyncio
import functools
from collections.abc import Callable
from typing import Any

from textual import events
from textual.screen import Screen

#: How long an action waits for the keys typed before it (seconds): a safety net only;
#: handling a burst's queued keys takes milliseconds.
SETTLE_TIMEOUT_S = 2.0


async def settle(screen: Screen) -> None:
    """Return once every widget of ``screen`` has handled the messages queued to it now.

    Deepest widgets first: a key waits in the focused field's queue, and what handling
    it posts (the field's change, the form's edit) bubbles up, towards the screen, into
    queues handled after it.  The app takes no other key meanwhile (the action that
    awaits this runs in the app's own task)."""
    by_depth: dict[int, list] = {}
    for node in [screen, *screen.walk_children(with_self=False)]:
        by_depth.setdefault(len(node.ancestors), []).append(node)
    for depth in sorted(by_depth, reverse=True):
        waits = []
        for node in by_depth[depth]:
            done = asyncio.Event()
            if node.call_later(done.set):
                waits.append(done.wait())
        if waits:
            try:
                await asyncio.wait_for(asyncio.gather(*waits), SETTLE_TIMEOUT_S)
            except TimeoutError:  # a widget that no longer handles messages: go on
                return


def after_typed_keys(action: Callable[..., Any]) -> Callable[..., Any]:
    """A screen's action that runs after the keys typed before its own key."""

    @functools.wraps(action)
    async def run(self: Screen, *args: Any) -> Any:
        await settle(self)
        return action(self, *args)

    return run


class OwnKeys:
    """A widget that handles its own bound keys (an Input's Backspace, Delete and arrows,
    a choice's Left and Right, a table's Up and Down) from its own queue, in the order
    they were typed with the characters around them.

    Without this a bound key goes back up to the app, which handles it after the keys
    already in its queue: in a burst, "7.355 Backspace Tab 40" took the Backspace from
    pCO2 (the field focused by then) instead of pH, and F5 kept the value before the
    Backspace.  Mixed in before the widget class: ``class ValueInput(OwnKeys, Input)``."""

    async def _on_key(self, event: events.Key) -> None:
        # Textual's map of this widget's own keys (not public API): where a version has
        # none, the keys go the default way.
        bindings = getattr(getattr(self, "_bindings", None), "key_to_bindings", None)
        if bindings is None:
            return
        for key in (event.key, *event.aliases):
            for binding in bindings.get(key, ()):
                if binding.priority:
                    continue
                event.stop()
                event.prevent_default()
                await self.run_action(binding.action)  # type: ignore[attr-defined]
                return
        # Not bound here: Textual calls the next class's own handler (an Input's typing)

"""Critical sections that a Ctrl-C or a kill request cannot cut in half.

Some short stretches of work must finish once begun: switching the output to standby and reading
it back, appending one line to the journal and fsyncing it, writing the run record. While one runs
inside :class:`deferred_signals`, the interrupting signals (Ctrl-C, a kill request, a lost
terminal) are only noted; when the outermost section ends, the previous handlers are back and the
first signal noted is acted on as it would have been (usually by raising ``KeyboardInterrupt``).

A run installs its handlers once (:func:`run_handlers`): one per interrupting signal, which notes
the signal while a section is open and otherwise does what the run wants of it. Sections inside
the run then only count themselves in and out; a section outside a run (a command's closing
words) puts the noting handler in place for its length and the previous one back after.

Python runs every signal handler in the main thread, whichever thread of the process the
operating system delivered the signal to, so this holds however many threads the process has
(a numerical library's worker, a console reader). Holding signals back at the operating-system
level does not: it holds them only for the thread that asks, and the process's other threads
still take them.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading

#: The signals a critical section defers: Ctrl-C, a kill request, a lost terminal, a quit key.
DEFERRED = tuple(
    getattr(signal, name)
    for name in ("SIGINT", "SIGTERM", "SIGHUP", "SIGQUIT")
    if hasattr(signal, name)
)


class _Held:
    """The one state of the process's critical sections (only the main thread touches it)."""

    depth = 0
    noted: list[int] = []
    #: What each signal noted in the open section is acted on with, once it ends.
    previous: dict[int, object] = {}
    #: While a run's handlers are installed: what each signal does outside a section.
    gates: dict[int, object] = {}


def _note(signum, frame) -> None:
    _Held.noted.append(signum)


def _gate(signum, frame) -> None:
    """The run's handler (see :func:`run_handlers`): noted inside a section, acted on outside."""
    if _Held.depth:
        _Held.noted.append(signum)
    else:
        _act(signum, _Held.gates.get(signum, signal.SIG_DFL), raising=True)


@contextlib.contextmanager
def run_handlers(handlers: dict):
    """Install, for the block, the handlers of a run: each interrupting signal (:data:`DEFERRED`)
    does what ``handlers`` says for it (a signal not named there keeps what it did before),
    except inside a critical section, where it is noted and acted on when the section ends.

    Installed once for the run, so its sections swap no handlers. Inside a block of its own
    (a run closing while it runs) or outside the main thread it leaves everything as it is.
    """
    if _Held.gates or threading.current_thread() is not threading.main_thread():
        yield
        return
    installed = {}
    try:
        for number in DEFERRED:
            # Both are known before the handler is in place: a signal taken the moment it is
            # set acts as the run wants, and the handler it replaced is put back after.
            installed[number] = signal.getsignal(number)
            _Held.gates[number] = handlers.get(number, installed[number])
            signal.signal(number, _gate)
        yield
    finally:
        try:
            _put_back(installed)
        finally:
            _Held.gates = {}


def _act(number: int, handler, *, raising: bool) -> None:
    """Do what ``handler`` (the one the signal had before the section) would have done."""
    if handler == signal.SIG_DFL or handler is None:
        # The default action (usually the end of the process), with the default handler back;
        # ``None`` is a handler set outside Python, and the default is the nearest to it.
        signal.signal(number, signal.SIG_DFL)
        os.kill(os.getpid(), number)
    elif callable(handler) and raising:
        handler(number, None)


class deferred_signals:  # noqa: N801 - used as a function: ``with deferred_signals():``
    """Run the block with interrupting signals noted, and act on them once it has ended.

    Nestable: only the outermost section installs and restores handlers, and acts. Of several
    signals noted in one section the first is acted on; if its handler returns instead of
    raising, the next is, and so on. When the block itself raised, or the section runs while an
    exception is on its way out (in an ``except`` or ``finally`` clause, or a guard's exit), a
    noted signal whose action would be to raise is dropped: that exception already stops what
    was running and says why, and a second one would hide it. A signal whose handler was the
    operating system's default still ends the process. Use a section inside an ``except`` clause
    only where the clause raises again. Outside the main thread (where Python cannot set
    handlers and no handler would run) the block runs as it is.
    """

    __slots__ = ("_active", "_gated")

    def __init__(self) -> None:
        self._active = False
        self._gated = False

    def __enter__(self) -> "deferred_signals":
        if threading.current_thread() is not threading.main_thread():
            return self
        if _Held.depth == 0:
            _Held.noted, _Held.previous = [], {}
        # Counted before the handlers are set and uncounted only after they are restored, so
        # that a signal taken by the noting handler at any moment is noted, never lost.
        _Held.depth += 1
        if _Held.depth == 1 and len(_Held.gates) == len(DEFERRED):  # a run's: nothing to swap
            _Held.previous = dict(_Held.gates)
            self._gated = True
        elif _Held.depth == 1:
            try:
                for number in DEFERRED:
                    _Held.previous[number] = signal.signal(number, _note)
            except BaseException:  # a signal taken before its handler was set: act as usual
                try:
                    _restore()
                finally:
                    _Held.depth = 0
                raise
        self._active = True
        return self

    def __exit__(self, kind, exc, traceback) -> bool:
        if not self._active:
            return False
        self._active = False
        if _Held.depth > 1:
            _Held.depth -= 1
            return False
        previous = dict(_Held.previous)
        if self._gated:
            # Uncounted first: a signal from now on acts at once, and none is noted unseen.
            _Held.depth = 0
            noted, _Held.noted = _Held.noted, []
            _Held.previous = {}
        else:
            try:
                _restore()
            finally:  # even when a signal taken as its handler came back raises: that one acts
                noted, _Held.noted = _Held.noted, []
                _Held.depth = 0
        in_flight = exc is not None or sys.exc_info()[1] is not None
        for number in noted:
            _act(number, previous.get(number), raising=not in_flight)
        return False


def _restore() -> None:
    """Put back every handler the section replaced (see :func:`_put_back`)."""
    try:
        _put_back(_Held.previous)
    finally:
        _Held.previous = {}


def _put_back(handlers: dict) -> None:
    """Put back each signal's handler of ``handlers``, all of them even if a signal taken
    meanwhile raises (it is raised once they are back)."""
    raised = None
    for number, handler in list(handlers.items()):
        while True:
            try:
                signal.signal(number, signal.SIG_DFL if handler is None else handler)
                break
            except BaseException as exc:  # from a handler just put back; finish first
                raised = raised or exc
    if raised is not None:
        raise raised


class _Taken:
    """Kill requests turned into ``KeyboardInterrupt`` by a run's handlers (see
    :func:`kill_request` and :func:`stop_if_asked`)."""

    names: list[str] = []


def kill_request(signum: int) -> KeyboardInterrupt:
    """Note a kill request (SIGTERM, SIGHUP, SIGQUIT) and return the interruption to raise for it.

    The raise can be lost: a signal whose handler runs inside a callback Python calls for itself
    (an import's lock, a weak reference's finaliser) has its exception printed and dropped there.
    The note stays, so the run's next :func:`stop_if_asked` stops it all the same."""
    name = signal.Signals(signum).name
    _Taken.names.append(name)
    return KeyboardInterrupt(f"terminated ({name})")


def forget_kill_requests() -> None:
    """Forget the kill requests noted so far (a run starting, or the one they stopped ending)."""
    _Taken.names = []


def stop_if_asked() -> None:
    """Raise ``KeyboardInterrupt`` if a kill request was noted and the run went on all the same
    (its raise was lost); called just before the output is switched on."""
    if _Taken.names:
        name = _Taken.names[0]
        forget_kill_requests()
        raise KeyboardInterrupt(f"terminated ({name})")

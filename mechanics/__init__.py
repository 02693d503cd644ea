"""Pure orbit and burn mechanics for burndesk.

Everything here works in SI floats (metres, seconds, kilograms, radians) with the unit in the
name, never does I/O, and never imports :mod:`console`.  The session journal
(:mod:`mechanics.session.journal`) is the single exception to "no I/O": it is the event store,
kept beside the reducer it feeds.
"""

__all__ = ["__version__"]

__version__ = "0.1.0"

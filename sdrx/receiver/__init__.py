"""The receiver chain at run time: a design bound to a capture, fast and exact paths."""

from .receiver import PATHS, Receiver, channel_rate

__all__ = ["Receiver", "PATHS", "channel_rate"]

"""Delays measured from a run, each beside its own theoretical prediction.

frame: the run in the forward frame (from arrays); methods: one function per
delay method and the registry METHODS; health: warnings of no one method;
report: the results; delays: measure_delays, which chains them."""
from .delays import measure_delays
from .methods import METHODS
from .report import ChannelReport, DelayReport, MethodResult

__all__ = ["measure_delays", "DelayReport", "ChannelReport", "MethodResult", "METHODS"]

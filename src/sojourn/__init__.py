"""sojourn: wave-packet scattering and time delays, simulated and compared with theory."""
__version__ = "0.1.0"

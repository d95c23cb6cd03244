"""Planning by simulation: array files, Earth-rotation tracks, noise and gain corruption,
simulated observations and forecasts (see README, "simulate and forecast", and DEVELOPERS.md,
"Simulation").

Importing this package configures astropy to work offline: it never tries to download
Earth-orientation tables and accepts the ones it ships, however old (see ``tracks.configure_offline``).
"""
from .tracks import configure_offline

configure_offline()

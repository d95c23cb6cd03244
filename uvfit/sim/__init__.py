"""Planning by simulation: array files, Earth-rotation tracks, noise and gain corruption,
simulated observations and forecasts (see README, "simulate and forecast", and DEVELOPERS.md,
"Simulation").

Importing this package changes no astropy setting. The functions that need Earth-orientation
data run offline, with astropy's IERS settings set for the call only (see
``tracks.offline_earth_orientation``): no download is ever attempted.
"""

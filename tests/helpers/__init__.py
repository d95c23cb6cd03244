"""Helpers shared by the test files: invented observations, invented model files, shape cases,
the README's demo run and the path of the real test data.

``arrays.observe`` is the one builder of invented observations; the other helpers make their
geometry (random uv points, a turning array, Earth-rotation tracks) and call it.
"""

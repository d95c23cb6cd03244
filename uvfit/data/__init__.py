"""Visibility data: the in-memory set, its readers and writers, selection and averaging."""

from .visset import StationTable, VisibilitySet

__all__ = ["StationTable", "VisibilitySet"]

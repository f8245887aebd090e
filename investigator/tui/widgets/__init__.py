"""Widgets of the investigation workspace, one per module."""

"""Screens of the investigation workspace, one per module."""

"""Widgets of Tankside, one job each."""

"""Widgets of the workbench, one job each."""

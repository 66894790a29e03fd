"""Modal screens of the workbench."""

"""Modal screens of Tankside."""

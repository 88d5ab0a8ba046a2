"""Reading fixes and writing outputs: the only modules that touch files."""

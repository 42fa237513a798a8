"""The release number, in one place (the package face, the headers and the spec read it)."""
__version__ = "0.1.0"

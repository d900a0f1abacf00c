"""modemverify: property-based verification of modem implementations."""
__version__ = "0.1.0"

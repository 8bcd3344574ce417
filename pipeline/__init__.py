"""thermoledger: ingest, check, reconcile and curate thermochemical species data."""
__version__ = "0.1.0"

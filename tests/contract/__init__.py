"""The input contract of the public API (see ``harness``)."""

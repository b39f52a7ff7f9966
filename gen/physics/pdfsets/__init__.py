"""Parton-density sets shipped with gen (data only); read them with `gen.pdf.load`."""

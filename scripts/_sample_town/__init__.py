"""Parts of the generator of the invented demo town (scripts/make_sample_gis.py)."""

"""Text summaries, JSON, CSV tables, the HTML report, notebook display and provenance;
assembles an output folder from a bundle of named files. Formats what results carry and
computes no analysis.
"""

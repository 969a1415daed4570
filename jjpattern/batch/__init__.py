"""Chip batches: many junctions listed in a manifest, analysed and summarised per chip.

``manifest`` reads the manifest into SI (one :class:`~jjpattern.batch.manifest.ManifestRow`
per junction) and ``starter`` writes a manifest to fill in; ``chipstats`` turns a table
of per-junction results into chip-level numbers (magnetic thickness, Jc and its spread,
linewidth offset, outliers), ``chiptext`` words them, and ``figures`` draws them.
Nothing is imported here; import the modules directly.
"""

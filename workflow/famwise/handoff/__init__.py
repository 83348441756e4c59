"""Handing a study to a collaborator: the files it reads, a packed archive
with a manifest of its data, and the comparison of two runs' provenance records."""

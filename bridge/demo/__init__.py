"""Bundled demo data: sight-reading scores of music-school students."""

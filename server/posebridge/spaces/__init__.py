"""Workspace and joint-space maps: reach, sections, obstacle maps."""

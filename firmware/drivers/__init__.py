"""Chip drivers and the adapters that present them to gaugecore (DEVELOPERS.md, "Interfaces the core sees")."""

"""Rendering results: CSV/JSON/XLSX files, the run summary, the HTML report, inline SVG plots, terminal tables."""

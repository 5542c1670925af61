"""The web layer: JSON API, pages and their wiring. Imports the core, never the reverse."""

"""Views of the tidy results: CSV tables, the forest plot, the manifest and the HTML page."""

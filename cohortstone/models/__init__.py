"""Models: each returns estimates plus what the design needs for its variance."""

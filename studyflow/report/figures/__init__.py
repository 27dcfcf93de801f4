"""Figure builders. Each returns a matplotlib ``Figure`` (never saved here) so tests can read back
labels and data extents from the object itself; ``export.save_figure`` writes PNG and SVG."""

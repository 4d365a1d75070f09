"""Single points with the rescue ladder and stability analysis; the sweep protocol; grids."""

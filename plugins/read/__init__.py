"""Read: turn each result file (YAML, CSV, xlsx) into a header and points, with the line of every field."""

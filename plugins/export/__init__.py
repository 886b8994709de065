"""Export: the tables written under ``OUT/data/`` (hook ``ll_export_tables``)."""

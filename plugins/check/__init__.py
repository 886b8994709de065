"""Schema check: validate the tests and points tables and parse every quantity (stage ``ll_check``)."""

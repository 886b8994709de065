"""Example loopledger site plugin: valve-position feedback with a positioner dead band."""

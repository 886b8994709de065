"""Pandera models of every file format loopledger reads and of the tables it passes and writes.

The models are the documentation of the formats: README links here.
"""

"""loopledger: judge transducer test results and publish a handbook of test evidence."""

__version__ = "0.1.0"

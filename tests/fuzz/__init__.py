"""Writers and oracles for round-trip, mutation and fuzz tests of the digit-file reader."""

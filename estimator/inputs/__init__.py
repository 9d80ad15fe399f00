"""Input contracts: every file format parsed and validated once into typed objects."""

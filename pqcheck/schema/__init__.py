"""Published JSON Schemas of pqcheck's documents (package data)."""

"""Source profiles, readers, row rules, ingest, ledger and operator pseudonymisation."""

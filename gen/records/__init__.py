"""Event records: the file schema, Arrow record batches built from a process's events, and the
Parquet store (a streaming writer that publishes complete files only, and the readers)."""

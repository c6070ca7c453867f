"""The DuckDB store: the one connection factory, schema files, transactional loads, frames in and out."""

//! solver-check: everything that reads loadloom datasets from files only.

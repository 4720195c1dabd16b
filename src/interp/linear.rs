//! Linear blend of two surveys (placeholder, filled in by the foundation work).

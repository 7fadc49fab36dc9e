//! Cross-crate integration and reference checks live in `tests/tests/`.

//! Cross-crate tests live in `tests/tests/`; this library only gives them a home.

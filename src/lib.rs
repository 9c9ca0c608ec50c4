//! Holds nothing: this package exists for the end-to-end tests in `tests/`.

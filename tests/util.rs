//! Shared test helpers.

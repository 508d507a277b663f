//! Router tests of the brief routes.

//! Router tests of the tables routes.

//! Router tests of the setup routes.

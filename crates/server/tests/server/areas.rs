//! Router tests of the areas routes.

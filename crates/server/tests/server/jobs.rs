//! Router tests of the jobs routes.

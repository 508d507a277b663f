//! Router tests of the survey routes.

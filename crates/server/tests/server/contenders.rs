//! Router tests of the contenders routes.

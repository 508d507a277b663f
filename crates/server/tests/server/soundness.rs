//! Router tests of the soundness routes.

//! Router tests of the whatif routes.

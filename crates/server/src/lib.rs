//! The wardcast server library: the web app, its security layer and its error type.

pub mod error;
pub mod security;
pub mod web;

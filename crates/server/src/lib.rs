//! The wardcast server library: the command line, the web app, its security layer and its error type.

pub mod analysis;
pub mod cli;
pub mod demo;
pub mod error;
pub mod security;
pub mod web;

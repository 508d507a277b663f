//! Integration tests of the store: import and validation, workbooks, joins and derived
//! columns, persistence, saved analyses and the SIGKILL fault test.

#[path = "store/common.rs"]
mod common;
#[path = "store/fault.rs"]
mod fault;
#[path = "store/import_csv.rs"]
mod import_csv;
#[path = "store/import_xlsx.rs"]
mod import_xlsx;
#[path = "store/join_derive.rs"]
mod join_derive;
#[path = "store/persist.rs"]
mod persist;
#[path = "store/robust.rs"]
mod robust;
#[path = "store/validation.rs"]
mod validation;

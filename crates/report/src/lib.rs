//! Reports: SVG charts and the budgeting brief built from engine results.

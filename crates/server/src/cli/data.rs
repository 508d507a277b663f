//! `wardcast import` and `wardcast tables`: validate a file, store it on request, and list
//! the stored tables.
//!
//! `import` always prints the validation report first and stores nothing unless `--save`
//! is given, so the report is seen before anything is saved. It exits 0 when the file can
//! be read (even when problems are listed) and 2 with a one-line reason when the file is
//! refused, or when `--save` was asked for and a blocking problem remains.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use wardcast_contract::dataset::{ColumnRole, ColumnType, ImportReport};
use wardcast_store::{
    DecimalChoice, Delimiter, Encoding, ImportOptions, Limits, RowDrop, Store, import_file,
};

/// Flags of `wardcast import`.
#[derive(Debug, clap::Args)]
pub struct ImportArgs {
    /// The CSV or XLSX file.
    pub file: PathBuf,
    /// The worksheet of a workbook (default: the first).
    #[arg(long)]
    pub sheet: Option<String>,
    /// The region key column (default: detected).
    #[arg(long)]
    pub key: Option<String>,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
    /// The text encoding of a CSV file that is not UTF-8: latin1 or windows-1252.
    #[arg(long)]
    pub encoding: Option<String>,
    /// The CSV delimiter: comma, semicolon, tab or pipe (default: sniffed).
    #[arg(long)]
    pub delimiter: Option<String>,
    /// The decimal separator: point or comma (default: a comma only in semicolon files that use it).
    #[arg(long)]
    pub decimal: Option<String>,
    /// A column's type: COLUMN=integer|decimal|text (repeatable).
    #[arg(long = "type", value_name = "COLUMN=TYPE")]
    pub types: Vec<String>,
    /// A column's role: COLUMN=key|count|population|rate|indicator|group (repeatable).
    #[arg(long = "role", value_name = "COLUMN=ROLE")]
    pub roles: Vec<String>,
    /// Drop a row, with the reason recorded: ROW:REASON (row numbers count the header as 1; repeatable).
    #[arg(long = "drop-row", value_name = "ROW:REASON")]
    pub drop_rows: Vec<String>,
    /// Read the text cells of this numeric column as missing values (repeatable).
    #[arg(long = "text-as-missing", value_name = "COLUMN")]
    pub text_as_missing: Vec<String>,
    /// Refuse files larger than this many bytes (no limit by default).
    #[arg(long)]
    pub max_bytes: Option<u64>,
    /// Where datasets are kept (default: a wardcast folder in the user's data directory).
    #[arg(long)]
    pub data_dir: Option<PathBuf>,
    /// Store the table under NAME (default: the file name without its extension) if nothing
    /// blocks saving; without this flag nothing is stored.
    #[arg(long, value_name = "NAME", num_args = 0..=1, default_missing_value = "")]
    pub save: Option<String>,
}

/// Flags of `wardcast tables`.
#[derive(Debug, clap::Args)]
pub struct TablesArgs {
    /// Print the list as JSON.
    #[arg(long)]
    pub json: bool,
    /// Where datasets are kept (default: a wardcast folder in the user's data directory).
    #[arg(long)]
    pub data_dir: Option<PathBuf>,
}

fn pair<'a>(text: &'a str, sep: char, what: &str) -> Result<(&'a str, &'a str), String> {
    text.split_once(sep)
        .map(|(a, b)| (a.trim(), b.trim()))
        .filter(|(a, b)| !a.is_empty() && !b.is_empty())
        .ok_or_else(|| {
            format!(
                "{what} {text:?} must look like {}",
                if sep == '=' { "COLUMN=VALUE" } else { "ROW:REASON" }
            )
        })
}

/// Builds the import options from the flags.
pub fn options(args: &ImportArgs) -> Result<ImportOptions, String> {
    let mut o = ImportOptions {
        sheet: args.sheet.clone(),
        key: args.key.clone(),
        limits: Limits { max_bytes: args.max_bytes, ..Limits::default() },
        ..ImportOptions::default()
    };
    if let Some(e) = &args.encoding {
        o.encoding = Encoding::parse(e).map_err(|e| e.to_string())?;
    }
    if let Some(d) = &args.delimiter {
        o.delimiter = Some(Delimiter::parse(d).map_err(|e| e.to_string())?);
    }
    if let Some(d) = &args.decimal {
        o.decimal = match d.trim().to_ascii_lowercase().as_str() {
            "point" | "." => DecimalChoice::Point,
            "comma" | "," => DecimalChoice::Comma,
            other => return Err(format!("{other:?} is not a decimal separator; use point or comma")),
        };
    }
    for t in &args.types {
        let (col, ty) = pair(t, '=', "--type")?;
        o.types.insert(col.to_owned(), ColumnType::parse(ty).map_err(|e| e.to_string())?);
    }
    for r in &args.roles {
        let (col, role) = pair(r, '=', "--role")?;
        o.roles.insert(col.to_owned(), ColumnRole::parse(role).map_err(|e| e.to_string())?);
    }
    for d in &args.drop_rows {
        let (row, reason) = pair(d, ':', "--drop-row")?;
        let row: usize = row.parse().map_err(|_| format!("--drop-row {d:?}: {row:?} is not a row number"))?;
        o.drop_rows.push(RowDrop { row, reason: reason.to_owned() });
    }
    o.text_as_missing.extend(args.text_as_missing.iter().cloned());
    Ok(o)
}

fn data_dir(given: &Option<PathBuf>) -> Result<PathBuf, String> {
    given
        .clone()
        .or_else(Store::default_dir)
        .ok_or_else(|| "there is no user data directory on this system; pass --data-dir".to_owned())
}

fn open_store(dir: &Path) -> Result<Store, String> {
    let (store, report) = Store::open(dir).map_err(|e| e.to_string())?;
    for line in &report.log {
        eprintln!("wardcast: {line}");
    }
    Ok(store)
}

fn number(v: Option<f64>) -> String {
    v.map_or_else(
        || "-".to_owned(),
        |x| format!("{x:.4}").trim_end_matches('0').trim_end_matches('.').to_owned(),
    )
}

/// The report as plain text.
pub fn render(r: &ImportReport) -> String {
    let mut out = String::new();
    let s = &r.source;
    let mut how = vec![s.format.clone()];
    if !s.encoding.is_empty() {
        how.push(s.encoding.clone());
    }
    if let Some(d) = &s.delimiter {
        how.push(format!("{d} delimiter"));
    }
    if let Some(d) = &s.decimal_separator {
        how.push(format!("decimal {d}"));
    }
    if let Some(sheet) = &s.sheet {
        how.push(format!("sheet {sheet:?} of {}", s.sheets.join(", ")));
    }
    out.push_str(&format!("{} ({}), {} bytes\n", s.file_name, how.join(", "), s.bytes));
    // Only the informative notes (a sniffed decimal comma, mixed styles) are repeated.
    if let Some(note) = s.decimal_note.as_ref().filter(|n| n.contains(':')) {
        out.push_str(&format!("  {note}\n"));
    }
    out.push_str(&format!(
        "{} rows; key: {}\n  {}\n",
        r.rows,
        r.key.as_deref().unwrap_or("none"),
        r.key_note
    ));
    out.push_str("\ncolumn | type | role | values | missing | min | max | mean | median\n");
    for c in &r.columns {
        out.push_str(&format!(
            "{} | {} | {} | {} | {} | {} | {} | {} | {}\n",
            c.column,
            c.column_type.name(),
            c.role.name(),
            c.count,
            c.missing,
            number(c.min),
            number(c.max),
            number(c.mean),
            number(c.median)
        ));
    }
    if r.problems.is_empty() {
        out.push_str("\nno problems found\n");
    } else {
        out.push_str("\nproblems:\n");
        for p in &r.problems {
            let mark = if p.blocks_saving { "must be resolved" } else { "check" };
            out.push_str(&format!("- [{mark}] {}\n", p.message));
            if !p.examples.is_empty() {
                let cells: Vec<String> =
                    p.examples.iter().map(|c| format!("row {}: {:?}", c.row, c.value)).collect();
                let more = if p.total > p.examples.len() {
                    format!(" (first {} of {})", p.examples.len(), p.total)
                } else {
                    String::new()
                };
                out.push_str(&format!("  {}{more}\n", cells.join("; ")));
            }
            out.push_str(&format!("  to resolve: {}\n", p.remedy));
        }
    }
    for d in &r.dropped_rows {
        out.push_str(&format!("dropped row {} ({}): {}\n", d.row, d.key, d.reason));
    }
    for n in &r.notes {
        out.push_str(&format!("note: {n}\n"));
    }
    out.push_str(if r.can_save {
        "\nthe table can be saved\n"
    } else {
        "\nthe table cannot be saved until the problems marked above are resolved\n"
    });
    out
}

/// Runs `wardcast import`.
pub fn run_import(args: &ImportArgs) -> Result<ExitCode, String> {
    let options = options(args)?;
    let staged = import_file(&args.file, &options).map_err(|e| e.to_string())?;
    if args.json {
        let text = serde_json::to_string_pretty(staged.report())
            .map_err(|e| format!("could not write JSON: {e}"))?;
        println!("{text}");
    } else {
        print!("{}", render(staged.report()));
    }
    let Some(name) = &args.save else { return Ok(ExitCode::SUCCESS) };
    let name = if name.trim().is_empty() {
        args.file.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_else(|| "table".to_owned())
    } else {
        name.clone()
    };
    let mut store = open_store(&data_dir(&args.data_dir)?)?;
    let manifest = store.save_import(&name, &staged).map_err(|e| e.to_string())?;
    eprintln!("wardcast: saved as {} ({} rows)", manifest.version_id, manifest.rows);
    Ok(ExitCode::SUCCESS)
}

/// Runs `wardcast tables`.
pub fn run_tables(args: &TablesArgs) -> Result<ExitCode, String> {
    let store = open_store(&data_dir(&args.data_dir)?)?;
    let list = store.list();
    if args.json {
        let text = serde_json::to_string_pretty(&list).map_err(|e| format!("could not write JSON: {e}"))?;
        println!("{text}");
        return Ok(ExitCode::SUCCESS);
    }
    if list.is_empty() {
        println!("no tables are stored in {}", store.root().display());
    }
    for t in &list {
        let versions: Vec<String> = t.versions.iter().map(u32::to_string).collect();
        println!(
            "{} ({}): versions {}; latest has {} rows and {} columns",
            t.dataset,
            t.name,
            versions.join(", "),
            t.rows,
            t.columns
        );
    }
    Ok(ExitCode::SUCCESS)
}

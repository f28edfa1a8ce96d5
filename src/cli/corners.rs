//! `cornerflow corners CASE`: the corner analysis of a case's domain as a table (and JSON).

use cornerflow::corners::{analyse_corners, corner_table};
use cornerflow::output::table::write_json;

use super::args::CornersArgs;
use super::load_case;

/// Runs `cornerflow corners`.
pub fn run(args: &CornersArgs) -> anyhow::Result<()> {
    let case = load_case(&args.case)?;
    let reports = analyse_corners(&case.domain, &case.conditions, case.model.viscous_form);
    println!("corners of {} ({} reported)", case.name, reports.len());
    println!("{}", corner_table(&reports));
    if let Some(path) = &args.json {
        write_json(path, &reports)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

//! `cornerflow corners CASE`: the corner analysis of a case's domain as a table (and JSON).

use cornerflow::corners::{AnalysisParams, try_analyse_corners};
use cornerflow::output::table::write_json;

use super::args::CornersArgs;
use super::load_case;

/// Runs `cornerflow corners`.
pub fn run(args: &CornersArgs) -> anyhow::Result<()> {
    let case = load_case(&args.case)?;
    let analysis = try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &AnalysisParams::default(),
    )?;
    println!("corners of {}", case.name);
    println!("{}", analysis.table());
    if let Some(path) = &args.json {
        write_json(path, &analysis.reports)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

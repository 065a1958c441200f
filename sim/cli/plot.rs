//! `loadloom plot`: a picture of a dataset (a day per conductor, or energy
//! per local month).

use super::CommandResult;
use solver_check::plot::{parse_size, plot, plot_monthly, Parts, PlotOptions};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Draw a dataset: per conductor its measured power and each appliance's
/// share; or, with --monthly, its energy per local month by appliance or
/// end use.
#[derive(clap::Args)]
pub struct Args {
    /// The dataset folder.
    dataset: PathBuf,
    /// Window start, local time (default: the busiest local day).
    #[arg(long)]
    from: Option<String>,
    /// Window end, local time.
    #[arg(long)]
    to: Option<String>,
    /// Instead: one bar per local calendar month, stacked by appliance
    /// (kWh, from the truth), the whole dataset.
    #[arg(long, conflicts_with_all = ["from", "to"])]
    monthly: bool,
    /// With --monthly: stack each month by appliance, or by end use (the
    /// appliances' `end_use`, summed). Default: appliance.
    #[arg(long, requires = "monthly", value_parser = ["appliance", "end-use"])]
    by: Option<String>,
    /// Output file (.svg or .png, by its extension).
    #[arg(long, default_value = "plot.svg", value_name = "FILE.svg|FILE.png")]
    out: PathBuf,
    /// Picture size in pixels, WIDTHxHEIGHT.
    #[arg(long, default_value = "1400x900")]
    size: String,
}

/// Draws the picture asked for and says what it shows.
pub fn main(a: Args) -> CommandResult {
    let (w, h) = parse_size(&a.size)?;
    if a.monthly {
        let parts = match a.by.as_deref() {
            Some("end-use") => Parts::EndUse,
            _ => Parts::Appliance,
        };
        return monthly(&a.dataset, &a.out, (w, h), parts);
    }
    let opts = PlotOptions {
        from: a.from,
        to: a.to,
        width: w,
        height: h,
    };
    let p = plot(&a.dataset, &a.out, &opts)?;
    println!(
        "wrote {} ({}x{} px, {} to {}, {} appliances in the legend)",
        a.out.display(),
        w,
        h,
        p.from,
        p.to,
        p.legend.len()
    );
    Ok(ExitCode::SUCCESS)
}

/// `plot --monthly`: the picture, then one line saying what it shows.
fn monthly(dataset: &Path, out: &Path, (w, h): (u32, u32), parts: Parts) -> CommandResult {
    let what = match parts {
        Parts::Appliance => "appliances",
        Parts::EndUse => "end uses",
    };
    let m = plot_monthly(dataset, out, (w, h), parts)?;
    println!(
        "wrote {} ({}x{} px, {} months from {} to {}, {} {what}{})",
        out.display(),
        w,
        h,
        m.months.len(),
        m.months.first().map(String::as_str).unwrap_or("-"),
        m.months.last().map(String::as_str).unwrap_or("-"),
        m.shown.len(),
        if m.others > 0 {
            format!(" and {} others together", m.others)
        } else {
            String::new()
        }
    );
    Ok(ExitCode::SUCCESS)
}

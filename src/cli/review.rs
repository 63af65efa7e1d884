//! `whorl review`: sign off a pending spectrum.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::library::Decision;

use super::{Context, identity, output};

#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("decision").required(true).args(["verify", "reject"])))]
pub struct ReviewArgs {
    /// Spectrum ids: one sign-off each, recorded together (all or none)
    #[arg(required = true, num_args = 1.., value_name = "ID")]
    pub ids: Vec<i64>,
    /// Verify it as a reference: its status becomes `verified` and it is searched by default
    /// (`--approve` is accepted as another name for it)
    #[arg(long, alias = "approve")]
    pub verify: bool,
    /// Reject it: it stays pending until revised or withdrawn
    #[arg(long)]
    pub reject: bool,
    /// The reviewer; must differ from the submitter [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// What the signature means [default: a statement of the decision]
    #[arg(long)]
    pub meaning: Option<String>,
    /// The revision you looked at: refused if the spectrum has been revised since
    #[arg(long, value_name = "N")]
    pub revision: Option<i64>,
    /// The reviewer's note
    #[arg(long)]
    pub note: Option<String>,
    /// Print the sign-off as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ReviewArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let decision = if args.verify {
        Decision::Approve
    } else {
        Decision::Reject
    };
    let reviewer = identity(args.by.as_deref())?;
    if args.revision.is_some() && args.ids.len() > 1 {
        return Err(whorl::Error::invalid(
            "--revision pins one spectrum's revision, and several spectra were named",
            "review spectra one at a time with --revision",
        )
        .into());
    }
    let reviews = lib.review_pinned(
        &args.ids,
        args.revision,
        &reviewer,
        decision,
        args.meaning.as_deref(),
        args.note.as_deref(),
    )?;
    let mut out = std::io::stdout().lock();
    if args.json {
        if let [one] = reviews.as_slice() {
            output::json(&mut out, one)?;
        } else {
            output::json(&mut out, &reviews)?;
        }
        return Ok(ExitCode::SUCCESS);
    }
    for review in &reviews {
        writeln!(
            out,
            "spectrum {} revision {} {} by {} at {}: {}",
            review.spectrum_id,
            review.revision,
            review.decision,
            output::shown(&review.reviewer),
            output::shown(&review.at),
            output::shown(&review.meaning)
        )?;
    }
    Ok(ExitCode::SUCCESS)
}

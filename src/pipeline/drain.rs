//! The offline path: a whole source drained through an analysis, with the accepted
//! records' transforms on the other cores (see `offload`).

use super::{Analysis, AnalysisConfig, offload};
use crate::error::Result;
use crate::signal::Roles;

/// Drain a source through a fresh analysis (the offline path; live paths push blocks
/// themselves as they arrive).
pub fn analyse_source(
    source: &mut dyn crate::source::Source,
    roles: Roles,
    cfg: AnalysisConfig,
    retain: bool,
) -> Result<Analysis> {
    let analysis = Analysis::new(&source.info().clone(), roles, cfg, retain)?;
    drain_into(source, analysis)
}

/// Drain a source through an analysis already set up (e.g. with disarmed ranges).
pub fn drain_into(source: &mut dyn crate::source::Source, analysis: Analysis) -> Result<Analysis> {
    drain_with_progress(source, analysis, &mut |_| {})
}

/// How far a drain has come, for a progress display.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Progress {
    /// Stream position in frames (samples per channel).
    pub frames: u64,
    pub hits: usize,
    pub accepted: usize,
}

/// `drain_into`, calling `progress` after every block. Accepted records are transformed on
/// the other cores while this thread reads on (see `offload`; the averages are the same as
/// one by one: sums in stream order).
pub fn drain_with_progress(
    source: &mut dyn crate::source::Source,
    mut analysis: Analysis,
    progress: &mut dyn FnMut(Progress),
) -> Result<Analysis> {
    let threads = crate::parallel::threads();
    if threads > 1 {
        // Records in flight at most (their records and transforms in memory).
        let limit = 2 * threads;
        analysis.offload = Some(offload::Offload::start(
            &analysis.averager,
            threads - 1,
            limit,
        ));
    }
    while let Some(block) = source.next_block()? {
        analysis.push(&block);
        progress(Progress {
            frames: block.start + block.len() as u64,
            hits: analysis.hits.len(),
            accepted: analysis.averager.count()
                + analysis
                    .offload
                    .as_ref()
                    .map_or(0, offload::Offload::in_flight),
        });
    }
    analysis.finish();
    analysis.offload = None;
    Ok(analysis)
}

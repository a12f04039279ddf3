//! `tapmodes capture`: headless live capture that saves the run files after every accepted hit.

use super::args::{AnalysisArgs, ChannelArgs};
use super::report;
use super::source_args::SourceArgs;
use crate::error::{Context, Result};
use crate::pipeline::Analysis;
use crate::run::recording::RecordingWriter;
use crate::run::validate;
use crate::run::{RunFile, Variant, write_run_files};
use crate::source::live::{Feed, LiveFeed};
use clap::Args;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

#[derive(Debug, Args)]
pub struct CaptureArgs {
    #[command(flatten)]
    pub source: SourceArgs,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
    /// Stop after this many accepted hits (at least 1).
    #[arg(long, default_value_t = 5, value_name = "N", value_parser = super::args::parse_count, help_heading = "Trigger")]
    pub hits: usize,
    /// Folder for the run files (created if missing).
    #[arg(
        long,
        default_value = "runs",
        value_name = "DIR",
        help_heading = "Outputs"
    )]
    pub out: PathBuf,
    /// Variant label; also names the files (LABEL.wav, LABEL.json, LABEL.csv).
    #[arg(
        long,
        default_value = "variant",
        value_name = "LABEL",
        help_heading = "Outputs"
    )]
    pub variant: String,
    /// Free-text note stored with the variant.
    #[arg(
        long,
        default_value = "",
        value_name = "TEXT",
        help_heading = "Outputs"
    )]
    pub note: String,
    /// Mass of the part as tested, in grams: stored with the variant for the mass-corrected
    /// stiffness ratio of `compare`.
    #[arg(long, value_name = "GRAMS", value_parser = super::args::parse_mass, help_heading = "Outputs")]
    pub mass: Option<f64>,
}

pub fn run(a: &CaptureArgs) -> Result<()> {
    let cfg = a.analysis.config()?;
    let drive = a.drive.drive()?;
    let opened = a.source.open(&a.channels, true)?;
    let info = opened.source.info().clone();
    validate::check_analysis(&cfg, &info, &opened.roles, "the command line")?;
    std::fs::create_dir_all(&a.out)
        .with_context(|| format!("cannot create folder '{}'", a.out.display()))?;
    let mut analysis = Analysis::new(&info, opened.roles, cfg, false)?;
    analysis.set_drive(drive);
    // The WAV is created exclusively: two captures into one folder never share a name.
    let (mut rec, stem) = RecordingWriter::create_fresh(&a.out, &a.variant, &info)?;
    let wav = a.out.join(format!("{stem}.wav"));
    let json = a.out.join(format!("{stem}.json"));
    let encoding = rec.encoding();
    let variant = Variant {
        label: validate::clean_text(&a.variant, false),
        note: validate::clean_text(&a.note, true),
        mass_g: a.mass,
    };
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        // SIGINT, SIGTERM and SIGHUP (ctrlc's `termination` feature). A second handler
        // cannot be installed in the same process (tests); ignore that.
        let _ = ctrlc::set_handler(move || stop.store(true, Ordering::SeqCst));
    }
    eprintln!(
        "capturing from {} at {} Hz ({} channels) into {}; {} accepted hits wanted; Ctrl-C ends early",
        validate::clean_text(&info.source, false),
        info.sample_rate,
        info.channels.len(),
        wav.display(),
        a.hits
    );
    let feed = LiveFeed::start(opened.source);
    let fs = info.sample_rate;
    let mut failure = None;
    let mut seen = 0;
    // The last run file written: a stop re-uses its modes (nothing accepted since), so
    // ending takes no fitting time.
    let mut saved: Option<RunFile> = None;
    while !stop.load(Ordering::SeqCst) && analysis.accepted() < a.hits {
        match feed.recv_timeout(std::time::Duration::from_millis(50)) {
            None => continue,
            Some(Feed::Ended(None)) => break,
            Some(Feed::Ended(Some(e))) => {
                failure = Some(e);
                break;
            }
            Some(Feed::Block(b)) => {
                if let Err(e) = rec.append(&b) {
                    // The recording cannot take this block: the run ends before it.
                    failure = Some(e);
                    break;
                }
                if analysis.push(&b) == 0 {
                    continue;
                }
                let mut accepted_now = false;
                for h in &analysis.hits()[seen..] {
                    accepted_now |= h.verdict.is_accepted();
                    eprintln!(
                        "hit {} at {:.2} s: {} ({}){}",
                        h.number,
                        h.trigger_sample as f64 / fs,
                        h.verdict.label(),
                        h.reason,
                        link_note(&feed, &analysis)
                    );
                }
                seen = analysis.hits().len();
                if accepted_now {
                    // Save as each accepted hit lands: nothing accepted is lost later.
                    let saved_now = rec.flush().and_then(|()| {
                        write_run_files(&analysis, variant.clone(), &json, Some(note(&rec, &wav)))
                    });
                    match saved_now {
                        Ok(run) => saved = Some(run),
                        Err(e) => {
                            failure = Some(e);
                            break;
                        }
                    }
                    eprintln!(
                        "  {} of {} accepted hits saved to {}",
                        analysis.accepted(),
                        a.hits,
                        json.display()
                    );
                }
            }
        }
    }
    // The recording ends where the analysis ended, so re-analysing the run file
    // reproduces it; blocks still queued behind the stop are not part of the run.
    drop(feed);
    analysis.finish();
    for h in &analysis.hits()[seen..] {
        eprintln!(
            "hit {} at {:.2} s: {} ({})",
            h.number,
            h.trigger_sample as f64 / fs,
            h.verdict.label(),
            h.reason
        );
    }
    let gaps = rec.gaps().to_vec();
    rec.finish()?;
    let run = match saved {
        Some(mut run) if run.hits_accepted == analysis.accepted() => {
            // Same accepted hits as the last save: bring the hit list and the recording
            // up to date without fitting again.
            run.hits = analysis.hits().to_vec();
            run.hits_total = run.hits.len();
            if let Some(r) = run.recording.as_mut() {
                r.frames = analysis.detector().position();
                r.gaps = gaps;
            }
            run.created_utc = crate::run::now_rfc3339();
            run.save(&json)?;
            run
        }
        _ => {
            let note = crate::run::RecordingNote {
                wav: &wav,
                encoding,
                gaps: &gaps,
            };
            write_run_files(&analysis, variant, &json, Some(note))?
        }
    };
    eprintln!(
        "{} hits, {} accepted{}{}",
        run.hits_total,
        run.hits_accepted,
        match report::rejection_summary(analysis.hits()) {
            s if s.is_empty() => String::new(),
            s => format!(" (rejected: {s})"),
        },
        if analysis.detector().lost_samples() > 0 {
            format!(
                "; {} samples lost to overruns or link loss, {} hit records abandoned across gaps",
                analysis.detector().lost_samples(),
                analysis.detector().interrupted_records()
            )
        } else {
            String::new()
        }
    );
    print!("{}", report::mode_table(&run.modes));
    if let Some(d) = &run.drive {
        print!("{}", crate::drive::report::summary(d, &run.modes));
    }
    println!("wrote {} and {}", wav.display(), json.display());
    if let Some(e) = failure {
        return Err(e.context(format!(
            "capture ended early with {} accepted hits saved in '{}'",
            run.hits_accepted,
            json.display()
        )));
    }
    if stop.load(Ordering::SeqCst) {
        eprintln!(
            "stopped by a signal (Ctrl-C, SIGTERM or SIGHUP); the run files hold everything up to now"
        );
    } else if run.hits_accepted < a.hits {
        crate::fail!(
            "the source ended after {} of {} accepted hits; what was captured is in '{}'",
            run.hits_accepted,
            a.hits,
            json.display()
        );
    }
    Ok(())
}

fn note<'a>(rec: &'a RecordingWriter, wav: &'a Path) -> crate::run::RecordingNote<'a> {
    crate::run::RecordingNote {
        wav,
        encoding: rec.encoding(),
        gaps: rec.gaps(),
    }
}

fn link_note(feed: &LiveFeed, analysis: &Analysis) -> String {
    let mut s = String::new();
    if let Some(l) = feed
        .link()
        .filter(|l| l.packets_lost + l.packets_corrupt + l.junk_lines > 0)
    {
        s += &format!(
            "; link: {} lost, {} corrupt, {} resyncs, {} junk lines",
            l.packets_lost, l.packets_corrupt, l.resyncs, l.junk_lines
        );
    }
    let over = feed.overrun_frames();
    if over > 0 {
        s += &format!("; {over} frames dropped (overrun)");
    }
    let lost = analysis.detector().lost_samples();
    if lost > 0 && over == 0 {
        s += &format!("; {lost} frames missing");
    }
    s
}

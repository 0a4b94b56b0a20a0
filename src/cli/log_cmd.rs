//! `cagehand log`: show the cage log, member health, record findings,
//! replacements and notes, and export a maintenance report. Also the
//! helpers `impact` uses to record an impact.

use super::{Loaded, bad_input};
use crate::health::{self, HealthReport, StatusChange};
use crate::logbook::export::{self, ReportHeader};
use crate::logbook::store::OpenReport;
use crate::logbook::{
    Access, Event, FindingEvent, FindingKind, ImpactEvent, Logbook, NoteEvent, Record,
    ReplacementEvent, StoreError,
};
use anyhow::Context;
use serde::Serialize;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Duration;

/// How long a writer waits for another to finish before giving up, unless
/// CAGEHAND_LOCK_WAIT_S says otherwise (scripts that prefer to fail fast).
const LOCK_WAIT: Duration = Duration::from_secs(5);

/// The lock wait in force: CAGEHAND_LOCK_WAIT_S (seconds, 0 to 3600) when
/// set, else 5 s. `cli::run` checks the variable before any command runs,
/// so a value it cannot read is reported, never silently ignored.
pub fn lock_wait() -> Duration {
    lock_wait_from_env().unwrap_or(LOCK_WAIT)
}

/// CAGEHAND_LOCK_WAIT_S read and checked: bad input when it is not a number
/// of seconds from 0 to 3600.
pub fn lock_wait_from_env() -> anyhow::Result<Duration> {
    let Some(text) = env_nonempty("CAGEHAND_LOCK_WAIT_S") else {
        return Ok(LOCK_WAIT);
    };
    text.trim()
        .parse::<f64>()
        .ok()
        .filter(|s| s.is_finite() && (0.0..=3600.0).contains(s))
        .map(Duration::from_secs_f64)
        .ok_or_else(|| {
            super::bad_input(format!(
                "CAGEHAND_LOCK_WAIT_S={text:?}: expected a number of seconds from 0 to 3600"
            ))
        })
}

/// Where the logs live and who is writing: shared by `log` and `impact`.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct LogOpts {
    /// Folder holding the cage logs (else $CAGEHAND_DATA, else the
    /// platform's data folder, e.g. ~/.local/share/cagehand).
    #[arg(long, value_name = "DIR", global = true)]
    pub data: Option<PathBuf>,
    /// Who records the event (else $CAGEHAND_OPERATOR, else the account
    /// name the operating system gives for the current user).
    #[arg(long, value_name = "NAME", global = true)]
    pub operator: Option<String>,
}

fn env_nonempty(name: &str) -> Option<String> {
    std::env::var(name).ok().filter(|s| !s.trim().is_empty())
}

impl LogOpts {
    /// The data folder: --data, else CAGEHAND_DATA, else the platform's.
    pub fn data_dir(&self) -> anyhow::Result<PathBuf> {
        if let Some(d) = &self.data {
            return Ok(d.clone());
        }
        if let Some(d) = env_nonempty("CAGEHAND_DATA") {
            return Ok(PathBuf::from(d));
        }
        dirs::data_dir()
            .map(|d| d.join("cagehand"))
            .ok_or_else(|| bad_input("no data folder: give --data DIR or set CAGEHAND_DATA"))
    }

    /// The operator, if one can be found: --operator, else
    /// CAGEHAND_OPERATOR, else the account name the operating system gives
    /// for the current user (the password database, so a container or an
    /// SSH session without $USER still has one), else USER/LOGNAME. The
    /// screens ask when this is None.
    pub fn operator_opt(&self) -> Option<String> {
        self.operator
            .clone()
            .filter(|s| !s.trim().is_empty())
            .or_else(|| env_nonempty("CAGEHAND_OPERATOR"))
            .or_else(|| whoami::username().ok().filter(|s| !s.trim().is_empty()))
            .or_else(|| env_nonempty("USER"))
            .or_else(|| env_nonempty("LOGNAME"))
            .or_else(|| env_nonempty("USERNAME"))
            .map(|s| s.trim().to_string())
    }

    /// The operator (see [`LogOpts::operator_opt`]), or bad input.
    pub fn operator(&self) -> anyhow::Result<String> {
        self.operator_opt()
            .ok_or_else(|| bad_input("no operator: give --operator NAME or set CAGEHAND_OPERATOR"))
    }

    /// Open the vehicle's log, telling the operator on stderr what opening
    /// found (corrupt records, a torn tail set aside).
    pub fn open(&self, l: &Loaded, access: Access) -> anyhow::Result<Logbook> {
        Ok(self.open_reporting(l, access)?.0)
    }

    /// As [`LogOpts::open`], also returning what opening found, for the
    /// commands that must say how far the log can be trusted.
    pub fn open_reporting(
        &self,
        l: &Loaded,
        access: Access,
    ) -> anyhow::Result<(Logbook, OpenReport)> {
        if access == Access::Write {
            // Refuse before any work when the record could not be signed.
            self.operator()?;
        }
        let dir = self.data_dir()?;
        if dir.exists() && !dir.is_dir() {
            return Err(bad_input(format!(
                "data folder {} is a file, not a folder: give --data a folder (or set CAGEHAND_DATA)",
                dir.display()
            )));
        }
        let (book, report) =
            Logbook::open(&dir, &l.profile.vehicle.id, access, lock_wait()).map_err(store_err)?;
        for m in report.messages(book.path()) {
            eprintln!("cagehand: warning: {m}");
        }
        Ok((book, report))
    }
}

/// A word for a shell command line, quoted when it needs to be.
fn shell_word(s: &str) -> String {
    if !s.is_empty()
        && s.bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"/._-+:=@,".contains(&b))
    {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

/// The ` --profile F --data D` a hinted command needs to reach the same
/// vehicle's log as this one (empty parts left out), so a pasted hint never
/// records on another vehicle or in another folder.
pub fn same_log_args(l: &Loaded, opts: &LogOpts) -> String {
    let mut s = String::new();
    if l.profile.source != crate::profile::DEMO_PROFILE_NAME {
        s.push_str(&format!(" --profile {}", shell_word(&l.profile.source)));
    }
    if let Ok(d) = opts.data_dir() {
        s.push_str(&format!(" --data {}", shell_word(&d.display().to_string())));
    }
    s
}

/// What a reader of health or a report must know about the log itself: it
/// does not exist (so "ok" means "nothing recorded"), or records were
/// skipped (so damage may be understated).
pub fn trust_note(report: &OpenReport, book: &Logbook) -> Option<String> {
    if report.new_file {
        return Some(format!(
            "no cage log at {} yet: nothing is recorded for this vehicle there (check --data and --profile); the health below assumes no impacts",
            book.path().display()
        ));
    }
    let skipped = report.problems.len() + usize::from(report.torn_tail.is_some());
    (skipped > 0).then(|| {
        format!(
            "{skipped} damaged record(s) skipped: damage may be understated; see `cagehand log show`"
        )
    })
}

/// Map a store error to an exit code: a log or id we cannot read is bad
/// input (2); I/O and a held lock are runtime failures (1).
pub fn store_err(e: StoreError) -> anyhow::Error {
    match e {
        StoreError::Format { .. } | StoreError::BadVehicleId(_) | StoreError::Record(_) => {
            bad_input(e.to_string())
        }
        other => anyhow::Error::new(other),
    }
}

/// Export formats.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum ExportFormat {
    /// Markdown report for print.
    Md,
    /// CSV of the health table.
    Csv,
}

#[derive(Debug, clap::Subcommand)]
enum Action {
    /// List the records.
    Show {
        /// Print JSON.
        #[arg(long)]
        json: bool,
    },
    /// Health of every member.
    Health {
        /// Print JSON.
        #[arg(long)]
        json: bool,
    },
    /// Record what an inspection found on a member.
    Finding {
        /// Member id (R1.., S1..).
        member: String,
        /// ok, fray, cut, crack, slack or loose_end.
        kind: String,
        /// Free text.
        #[arg(long)]
        note: Option<String>,
    },
    /// Record a member replacement.
    Replace {
        /// Member id (R1.., S1..).
        member: String,
        /// Part number or lot of the new member.
        #[arg(long)]
        part: Option<String>,
        /// Free text.
        #[arg(long)]
        note: Option<String>,
    },
    /// Record a note.
    Note {
        /// The note.
        text: String,
        /// Write the note this many times, one record each (for tests of
        /// crash safety).
        #[arg(long, hide = true, default_value_t = 1)]
        repeat: u32,
    },
    /// Write a maintenance report.
    Export {
        /// md or csv.
        #[arg(long, value_enum)]
        format: ExportFormat,
        /// Write to this file instead of standard output.
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
}

/// Work with the cage log of a vehicle.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Vehicle profile (TOML); the built-in demo profile when omitted.
    /// Accepted before or after the action (`log health --profile F`).
    #[arg(long, value_name = "FILE", global = true)]
    profile: Option<std::path::PathBuf>,
    #[command(flatten)]
    opts: LogOpts,
    #[command(subcommand)]
    action: Action,
}

/// A member id of this cage, or bad input listing the valid ones.
fn member_id(l: &Loaded, id: &str) -> anyhow::Result<String> {
    if l.cage.member_index(id).is_some() {
        return Ok(id.to_string());
    }
    let ids: Vec<&str> = l.cage.members.iter().map(|m| m.id.as_str()).collect();
    Err(bad_input(format!(
        "unknown member {id:?}; valid members are {}",
        ids.join(", ")
    )))
}

fn finding_kind(s: &str) -> anyhow::Result<FindingKind> {
    FindingKind::parse(s).ok_or_else(|| {
        let names: Vec<&str> = FindingKind::ALL.iter().map(|k| k.name()).collect();
        bad_input(format!(
            "unknown finding kind {s:?}; valid kinds are {}",
            names.join(", ")
        ))
    })
}

/// Health of the cage from the records.
pub fn assess(l: &Loaded, records: &[Record]) -> HealthReport {
    health::assess(records, &l.cage, &l.profile.inspection)
}

/// Print status changes in words.
pub fn write_changes(out: &mut impl Write, changes: &[StatusChange]) -> anyhow::Result<()> {
    if changes.is_empty() {
        writeln!(out, "no member changed status")?;
    }
    for c in changes {
        writeln!(out, "{}: {} -> {}", c.id, c.from.label(), c.to.label())?;
        for r in &c.reasons {
            writeln!(out, "    {r}")?;
        }
    }
    Ok(())
}

/// Append one event, with the health before and after.
fn record(
    l: &Loaded,
    opts: &LogOpts,
    book: &mut Logbook,
    event: Event,
) -> anyhow::Result<(Record, Vec<StatusChange>)> {
    let operator = opts.operator()?;
    let before = assess(l, book.records());
    let rec = book
        .append(&operator, jiff::Timestamp::now(), event)
        .map_err(store_err)
        .context("nothing was recorded")?;
    let after = assess(l, book.records());
    Ok((rec, health::changes(&before, &after)))
}

/// Record an analysed impact in the log: the record and the status changes.
pub fn record_impact(
    l: &Loaded,
    opts: &LogOpts,
    book: &mut Logbook,
    event: ImpactEvent,
) -> anyhow::Result<(Record, Vec<StatusChange>)> {
    record(l, opts, book, Event::Impact(event))
}

#[derive(Serialize)]
struct ShowJson<'a> {
    vehicle: &'a str,
    log: String,
    records: &'a [Record],
}

fn write_health_table(out: &mut impl Write, h: &HealthReport) -> anyhow::Result<()> {
    writeln!(
        out,
        "member  kind    status        damage  max use  impacts"
    )?;
    for m in &h.members {
        let kind = match m.kind {
            crate::cage::MemberKind::Rod => "rod",
            crate::cage::MemberKind::String => "string",
        };
        writeln!(
            out,
            "{:<7} {:<7} {:<12} {:>7.3}  {:>6.0}%  {:>7}",
            m.id,
            kind,
            m.status.label(),
            m.damage,
            m.max_utilisation * 100.0,
            m.impacts
        )?;
    }
    Ok(())
}

/// Run `cagehand log`.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let l = super::load_profile(args.profile.as_deref())?;
    let opts = &args.opts;
    let mut out = std::io::stdout().lock();
    match &args.action {
        Action::Show { json } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            if let Some(n) = trust_note(&report, &book) {
                eprintln!("cagehand: warning: {n}");
            }
            if *json {
                let j = ShowJson {
                    vehicle: &l.profile.vehicle.id,
                    log: book.path().display().to_string(),
                    records: book.records(),
                };
                writeln!(out, "{}", serde_json::to_string_pretty(&j)?)?;
            } else {
                writeln!(
                    out,
                    "cage log of {} ({}): {} records",
                    l.profile.vehicle.id,
                    book.path().display(),
                    book.records().len()
                )?;
                for r in book.records() {
                    writeln!(
                        out,
                        "#{:<4} {}  {:<10} {:<11} {}",
                        r.seq,
                        r.time,
                        r.operator,
                        r.event.name(),
                        r.event.summary()
                    )?;
                }
            }
        }
        Action::Health { json } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            let note = trust_note(&report, &book);
            let h = assess(&l, book.records());
            for w in &h.warnings {
                eprintln!("cagehand: warning: {w}");
            }
            if *json {
                writeln!(out, "{}", serde_json::to_string_pretty(&h.members)?)?;
            } else {
                if report.new_file {
                    writeln!(
                        out,
                        "health of {}: NO RECORDS (no cage log found)",
                        l.profile.vehicle.id
                    )?;
                } else {
                    writeln!(
                        out,
                        "health of {} from {} records: worst {}",
                        l.profile.vehicle.id,
                        book.records().len(),
                        h.worst().label()
                    )?;
                }
                if let Some(n) = &note {
                    writeln!(out, "WARNING: {n}")?;
                }
                write_health_table(&mut out, &h)?;
                let act = h.to_act_on();
                if !act.is_empty() {
                    writeln!(out)?;
                    writeln!(out, "to act on:")?;
                    for m in act {
                        writeln!(out, "{} {}", m.id, m.status.label())?;
                        for r in &m.reasons {
                            writeln!(out, "    {r}")?;
                        }
                    }
                }
                writeln!(out)?;
                writeln!(out, "Caution: {}", export::CAUTION)?;
            }
        }
        Action::Finding { member, kind, note } => {
            let member = member_id(&l, member)?;
            let kind = finding_kind(kind)?;
            let mut book = opts.open(&l, Access::Write)?;
            let ev = Event::Finding(FindingEvent {
                member,
                kind,
                note: note.clone(),
            });
            let (rec, ch) = record(&l, opts, &mut book, ev)?;
            writeln!(out, "recorded #{}: {}", rec.seq, rec.event.summary())?;
            write_changes(&mut out, &ch)?;
        }
        Action::Replace { member, part, note } => {
            let member = member_id(&l, member)?;
            let mut book = opts.open(&l, Access::Write)?;
            let ev = Event::Replacement(ReplacementEvent {
                member,
                part: part.clone(),
                note: note.clone(),
            });
            let (rec, ch) = record(&l, opts, &mut book, ev)?;
            writeln!(out, "recorded #{}: {}", rec.seq, rec.event.summary())?;
            write_changes(&mut out, &ch)?;
        }
        Action::Note { text, repeat } => {
            if text.trim().is_empty() {
                return Err(bad_input("the note is empty"));
            }
            let operator = opts.operator()?;
            let mut book = opts.open(&l, Access::Write)?;
            for i in 0..*repeat {
                let text = if *repeat > 1 {
                    format!("{text} {}", i + 1)
                } else {
                    text.clone()
                };
                let rec = book
                    .append(
                        &operator,
                        jiff::Timestamp::now(),
                        Event::Note(NoteEvent { text }),
                    )
                    .map_err(store_err)
                    .context("nothing was recorded")?;
                writeln!(out, "recorded #{}", rec.seq)?;
            }
        }
        Action::Export { format, out: path } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            let note = trust_note(&report, &book);
            let h = assess(&l, book.records());
            let text = match format {
                ExportFormat::Md => {
                    let log_path = book.path().display().to_string();
                    let generated = crate::logbook::format_time(jiff::Timestamp::now());
                    let header = ReportHeader {
                        vehicle_id: &l.profile.vehicle.id,
                        vehicle_name: &l.profile.vehicle.name,
                        profile: &l.profile.source,
                        log_path: &log_path,
                        generated: &generated,
                    };
                    let margin = super::margin_cmd::compute(
                        &l,
                        book.records(),
                        None,
                        crate::margin::Strikes::Faces,
                    )
                    .map_err(|e| format!("{e:#}"));
                    let md = export::markdown_with_margin(
                        &header,
                        book.records(),
                        &h,
                        Some(margin.as_ref().map_err(Clone::clone)),
                    );
                    match &note {
                        // The warning goes right under the title, where a
                        // reader of the printed report cannot miss it.
                        Some(n) => match md.split_once('\n') {
                            Some((title, rest)) => {
                                format!("{title}\n\n> **Warning.** {n}\n{rest}")
                            }
                            None => format!("> **Warning.** {n}\n\n{md}"),
                        },
                        None => md,
                    }
                }
                ExportFormat::Csv => export::csv(&h),
            };
            match path {
                Some(p) => {
                    write_file(p, text.as_bytes())?;
                    writeln!(out, "wrote {}", p.display())?;
                }
                None => out.write_all(text.as_bytes())?,
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn write_file(p: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    let mut f =
        std::fs::File::create(p).with_context(|| format!("cannot create {}", p.display()))?;
    f.write_all(bytes)
        .and_then(|()| f.sync_data())
        .with_context(|| format!("cannot write {}", p.display()))?;
    Ok(())
}

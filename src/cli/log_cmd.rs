//! `cagehand log`: show the cage log, member health, record findings,
//! replacements and notes, and export a maintenance report. Also the
//! helpers `impact` uses to record an impact.

use super::{Loaded, bad_input};
use anyhow::Context;
use cagehand::health::{self, HealthReport, StatusChange};
use cagehand::logbook::detection::ConfirmInput;
use cagehand::logbook::store::OpenReport;
use cagehand::logbook::{
    Access, ChainHead, Event, FindingEvent, FindingKind, ImpactEvent, Integrity, Logbook,
    NoteEvent, Record, ReplacementEvent, StoreError,
};
use cagehand::report::{self as export, ReportHeader};
use cagehand::text::terminal;
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

/// Where the logs live, for the `log` actions: `--data` on every action,
/// `--operator` ([`OperatorArg`]) only on those that write a record.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct DataArg {
    /// Folder holding the cage logs (else $CAGEHAND_DATA, else the
    /// platform's data folder, e.g. ~/.local/share/cagehand).
    #[arg(long, value_name = "DIR", global = true)]
    pub data: Option<PathBuf>,
}

/// Who writes the record: offered only where a record is written.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct OperatorArg {
    /// Who records the event (else $CAGEHAND_OPERATOR, else the account
    /// name the operating system gives for the current user).
    #[arg(long, value_name = "NAME")]
    pub operator: Option<String>,
}

impl DataArg {
    /// The log options of an action: this folder, and the operator when
    /// the action writes (None: reading needs nobody's name).
    pub fn with(&self, who: Option<&OperatorArg>) -> LogOpts {
        LogOpts {
            data: self.data.clone(),
            operator: who.and_then(|w| w.operator.clone()),
        }
    }
}

/// Where the logs live and who is writing: for the commands that write a
/// record (`impact`, `watch`, `preflight`); `log` builds it per action.
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
            say_err!("cagehand: warning: {}", terminal(&m));
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
    if l.profile.source != cagehand::profile::DEMO_PROFILE_NAME {
        s.push_str(&format!(" --profile {}", shell_word(&l.profile.source)));
    }
    if let Ok(d) = opts.data_dir() {
        let d = std::path::absolute(&d).unwrap_or(d);
        s.push_str(&format!(" --data {}", shell_word(&d.display().to_string())));
    }
    s
}

/// What a reader of health or a report must know about the log itself: it
/// does not exist (so "ok" means "nothing recorded"), or it has integrity
/// problems (records skipped, changed, removed: damage may be understated).
pub fn trust_note(report: &OpenReport, book: &Logbook) -> Option<String> {
    if report.new_file {
        return Some(format!(
            "no cage log at {} yet: nothing is recorded for this vehicle there (check --data and --profile); the health below assumes no impacts",
            book.path().display()
        ));
    }
    report
        .integrity
        .headline()
        .map(|h| format!("{h}; see `cagehand log verify`"))
}

/// The integrity problems, one indented line each, for the readable
/// outputs (escaped: they quote the file).
fn write_integrity(out: &mut impl Write, integrity: &Integrity) -> anyhow::Result<()> {
    for i in &integrity.issues {
        writeln!(out, "  {}", terminal(&i.to_string()))?;
    }
    Ok(())
}

/// `SEQ:HASH`, or a dash when there is no log.
fn head_text(book: &Logbook) -> String {
    book.head()
        .map(ChainHead::to_string)
        .unwrap_or_else(|| "- (no log yet)".to_string())
}

/// The first line of `log show` and `log verify`: whose log, where, how
/// many records, and the chain head.
fn write_title(out: &mut impl Write, l: &Loaded, book: &Logbook) -> anyhow::Result<()> {
    writeln!(
        out,
        "cage log of {} ({}): {} records, chain head {}",
        terminal(&l.profile.vehicle.id),
        terminal(&book.path().display().to_string()),
        book.records().len(),
        head_text(book)
    )?;
    Ok(())
}

/// Map a store error to an exit code: a log or id we cannot read is bad
/// input (2); I/O and a held lock are runtime failures (1).
pub fn store_err(e: StoreError) -> anyhow::Error {
    match e {
        StoreError::Format { .. }
        | StoreError::BadVehicleId(_)
        | StoreError::Record(_)
        | StoreError::SequenceExhausted { .. } => bad_input(e.to_string()),
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
        #[command(flatten)]
        who: OperatorArg,
    },
    /// Record a member replacement.
    Replace {
        /// Member id (R1.., S1..).
        member: String,
        /// Part number or lot of the new member (left out, the record names
        /// none and a warning says so; given empty, refused).
        #[arg(long)]
        part: Option<String>,
        /// Free text.
        #[arg(long)]
        note: Option<String>,
        #[command(flatten)]
        who: OperatorArg,
    },
    /// Record a note.
    Note {
        /// The note.
        text: String,
        /// Write the note this many times, one record each (for tests of
        /// crash safety).
        #[arg(long, hide = true, default_value_t = 1)]
        repeat: u32,
        #[command(flatten)]
        who: OperatorArg,
    },
    /// List detected impacts neither confirmed nor dismissed.
    Pending {
        /// Print JSON (an array of {seq, time, peak_g, face, speed_m_per_s, source}).
        #[arg(long)]
        json: bool,
    },
    /// Confirm a detected impact: analyse it as `cagehand impact` does, with
    /// the face and the input taken from the detection unless given (the
    /// approach speed when the link carried one, else the measured peak: the
    /// screens' form is filled the same way).
    #[command(group(clap::ArgGroup::new("where").args(["face", "node"])))]
    #[command(group(clap::ArgGroup::new("how").args(["speed", "peak_accel_g"])))]
    Confirm {
        /// Sequence number of the detection record (`log pending`).
        seq: u64,
        /// Struck face id (F1..), instead of the detected one.
        #[arg(long, value_name = "ID")]
        face: Option<String>,
        /// Struck node id (N1..), instead of the detected face.
        #[arg(long, value_name = "ID")]
        node: Option<String>,
        /// Peak acceleration in g, instead of the detection's input.
        #[arg(long, value_name = "G", allow_negative_numbers = true)]
        peak_accel_g: Option<f64>,
        /// Approach speed normal to the ground, instead of the detection's input.
        #[arg(long, value_name = "M_PER_S", allow_negative_numbers = true)]
        speed: Option<f64>,
        /// Ground surface preset (with --speed).
        #[arg(long, value_name = "NAME", requires = "speed")]
        surface: Option<String>,
        /// Free text stored with the impact.
        #[arg(long, value_name = "TEXT")]
        note: Option<String>,
        /// Print JSON (as `cagehand impact --json`, with `detection`).
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        who: OperatorArg,
    },
    /// Dismiss a detected impact that was not a crash, with the reason.
    Dismiss {
        /// Sequence number of the detection record (`log pending`).
        seq: u64,
        /// Why it was not a crash ("hand launch", "dropped on the bench").
        #[arg(long, value_name = "TEXT")]
        reason: String,
        #[command(flatten)]
        who: OperatorArg,
    },
    /// Check the log's hash chain, and optionally that it still holds a
    /// chain head kept from an earlier report; exit 1 on any problem.
    Verify {
        /// A chain head `SEQ:HASH` as a report printed it (16 or more hex
        /// digits of the hash).
        #[arg(long, value_name = "SEQ:HASH")]
        head: Option<String>,
        /// Print JSON.
        #[arg(long)]
        json: bool,
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
    data: DataArg,
    #[command(subcommand)]
    action: Action,
}

impl Action {
    /// The operator option of an action that writes a record.
    fn who(&self) -> Option<&OperatorArg> {
        match self {
            Action::Finding { who, .. }
            | Action::Replace { who, .. }
            | Action::Note { who, .. }
            | Action::Confirm { who, .. }
            | Action::Dismiss { who, .. } => Some(who),
            Action::Show { .. }
            | Action::Health { .. }
            | Action::Pending { .. }
            | Action::Verify { .. }
            | Action::Export { .. } => None,
        }
    }
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
        writeln!(
            out,
            "{}: {} -> {}",
            terminal(&c.id),
            c.from.label(),
            c.to.label()
        )?;
        for r in &c.reasons {
            writeln!(out, "    {}", terminal(r))?;
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

/// The detection `seq` is pending in this log, or bad input saying what
/// became of it.
pub fn check_pending(book: &Logbook, seq: u64) -> anyhow::Result<()> {
    cagehand::logwork::check_pending(book, seq)
        .map_err(|e| bad_input(format!("{}: {e}", book.path().display())))
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

/// `log show --json` (docs/json.md).
#[derive(Serialize)]
struct ShowJson<'a> {
    schema: &'static str,
    vehicle: &'a str,
    log: String,
    records: &'a [Record],
    integrity: IntegrityJson<'a>,
}

#[derive(Serialize)]
struct IssueJson<'a> {
    line: usize,
    kind: cagehand::logbook::IssueKind,
    detail: &'a str,
    effect: &'static str,
}

/// The log's integrity for scripts (`cagehand.log_show/1`,
/// `cagehand.log_verify/1`; docs/json.md).
#[derive(Serialize)]
struct IntegrityJson<'a> {
    sound: bool,
    head: Option<String>,
    issues: Vec<IssueJson<'a>>,
    notes: &'a [String],
    unchained_records: usize,
}

fn integrity_json<'a>(book: &Logbook, i: &'a Integrity) -> IntegrityJson<'a> {
    IntegrityJson {
        sound: i.is_sound(),
        head: book.head().map(ChainHead::to_string),
        issues: i
            .issues
            .iter()
            .map(|x| IssueJson {
                line: x.line,
                kind: x.kind,
                detail: &x.detail,
                effect: x.kind.effect(),
            })
            .collect(),
        notes: &i.notes,
        unchained_records: i.unchained,
    }
}

#[derive(Serialize)]
struct VerifyJson<'a> {
    schema: &'static str,
    vehicle: &'a str,
    log: String,
    exists: bool,
    records: usize,
    integrity: IntegrityJson<'a>,
    kept_head: Option<KeptHeadJson>,
}

#[derive(Serialize)]
struct KeptHeadJson {
    head: String,
    matches: bool,
    detail: String,
}

/// `log health --json` (docs/json.md).
#[derive(Serialize)]
struct HealthJson<'a> {
    schema: &'static str,
    vehicle: &'a str,
    log: String,
    /// False when there is no log file: every member then reads ok
    /// because nothing is recorded, not because the cage is sound.
    log_found: bool,
    records: usize,
    /// What a reader must know about the log (no log, records skipped).
    log_warning: Option<String>,
    /// Detected impacts neither confirmed nor dismissed: the health below
    /// does not count them yet.
    pending_warning: Option<String>,
    worst: cagehand::health::Status,
    members: &'a [cagehand::health::MemberHealth],
    /// Log entries naming members this cage does not have.
    warnings: &'a [String],
}

fn write_health_table(out: &mut impl Write, h: &HealthReport) -> anyhow::Result<()> {
    writeln!(
        out,
        "member  kind    status        damage  max use  impacts"
    )?;
    for m in &h.members {
        let kind = match m.kind {
            cagehand::cage::MemberKind::Rod => "rod",
            cagehand::cage::MemberKind::String => "string",
        };
        writeln!(
            out,
            "{:<7} {:<7} {:<12} {:>7.3}  {:>6.0}%  {:>7}",
            terminal(&m.id),
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
    let opts = &args.data.with(args.action.who());
    let mut out = std::io::stdout().lock();
    match &args.action {
        Action::Show { json } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            if let Some(n) = trust_note(&report, &book) {
                say_err!("cagehand: warning: {n}");
            }
            if *json {
                let j = ShowJson {
                    schema: "cagehand.log_show/1",
                    vehicle: &l.profile.vehicle.id,
                    log: book.path().display().to_string(),
                    records: book.records(),
                    integrity: integrity_json(&book, &report.integrity),
                };
                super::write_json(&mut out, &j)?;
            } else {
                write_title(&mut out, &l, &book)?;
                if let Some(h) = report.integrity.headline() {
                    writeln!(out, "WARNING: {h}")?;
                    write_integrity(&mut out, &report.integrity)?;
                }
                for r in book.records() {
                    writeln!(
                        out,
                        "#{:<4} {}  {:<10} {:<11} {}",
                        r.seq,
                        terminal(&r.time),
                        terminal(&r.operator),
                        r.event.name(),
                        terminal(&r.event.summary())
                    )?;
                }
            }
        }
        Action::Health { json } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            let note = trust_note(&report, &book);
            let h = assess(&l, book.records());
            for w in &h.warnings {
                say_err!("cagehand: warning: {}", terminal(w));
            }
            let pending = cagehand::logbook::detection::pending_warning(
                &cagehand::logbook::pending(book.records()),
            );
            if *json && let Some(p) = &pending {
                say_err!("cagehand: warning: PENDING: {p}");
            }
            if *json {
                let j = HealthJson {
                    schema: "cagehand.health/1",
                    vehicle: &l.profile.vehicle.id,
                    log: book.path().display().to_string(),
                    log_found: !report.new_file,
                    records: book.records().len(),
                    log_warning: note.clone(),
                    pending_warning: pending.clone(),
                    worst: h.worst(),
                    members: &h.members,
                    warnings: &h.warnings,
                };
                super::write_json(&mut out, &j)?;
            } else {
                let vid = terminal(&l.profile.vehicle.id);
                if report.new_file {
                    writeln!(out, "health of {vid}: NO RECORDS (no cage log found)")?;
                } else {
                    writeln!(
                        out,
                        "health of {vid} from {} records: worst {}",
                        book.records().len(),
                        h.worst().label()
                    )?;
                    writeln!(
                        out,
                        "chain head {} (keep it to check the log later: `cagehand log verify --head SEQ:HASH`)",
                        head_text(&book)
                    )?;
                }
                if let Some(n) = &note {
                    writeln!(out, "WARNING: {}", terminal(n))?;
                    write_integrity(&mut out, &report.integrity)?;
                }
                if let Some(p) = &pending {
                    writeln!(out, "PENDING: {p}")?;
                }
                write_health_table(&mut out, &h)?;
                let act = h.to_act_on();
                if !act.is_empty() {
                    writeln!(out)?;
                    writeln!(out, "to act on:")?;
                    for m in act {
                        writeln!(out, "{} {}", terminal(&m.id), m.status.label())?;
                        for r in &m.reasons {
                            writeln!(out, "    {}", terminal(r))?;
                        }
                    }
                }
                writeln!(out)?;
                writeln!(out, "Caution: {}", export::CAUTION)?;
            }
        }
        Action::Finding {
            member, kind, note, ..
        } => {
            let member = member_id(&l, member)?;
            let kind = finding_kind(kind)?;
            let mut book = opts.open(&l, Access::Write)?;
            let ev = Event::Finding(FindingEvent {
                member,
                kind,
                note: note.clone(),
            });
            let (rec, ch) = record(&l, opts, &mut book, ev)?;
            writeln!(
                out,
                "recorded #{} in the cage log of {} ({}): {}",
                rec.seq,
                l.profile.vehicle.id,
                book.path().display(),
                terminal(&rec.event.summary())
            )?;
            write_changes(&mut out, &ch)?;
        }
        Action::Replace {
            member, part, note, ..
        } => {
            let member = member_id(&l, member)?;
            // `--part` may be left out (the command's contract), but a part
            // given empty is a mistake, not a lot number.
            let part = match part.as_deref().map(str::trim) {
                Some("") => {
                    return Err(bad_input(
                        "--part is empty: give the part number or lot that went in, or leave --part out",
                    ));
                }
                p => p.map(str::to_string),
            };
            let mut book = opts.open(&l, Access::Write)?;
            let ev = Event::Replacement(ReplacementEvent {
                member,
                part: part.clone(),
                note: note.clone(),
            });
            let (rec, ch) = record(&l, opts, &mut book, ev)?;
            writeln!(
                out,
                "recorded #{} in the cage log of {} ({}): {}",
                rec.seq,
                l.profile.vehicle.id,
                book.path().display(),
                terminal(&rec.event.summary())
            )?;
            write_changes(&mut out, &ch)?;
            if part.is_none() {
                say_err!(
                    "cagehand: warning: record #{} names no part or lot: an inspector will ask which lot went in (give --part; the screens require it)",
                    rec.seq
                );
            }
        }
        Action::Note { text, repeat, .. } => {
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
            say_err!(
                "cagehand: written to the cage log of {} ({})",
                l.profile.vehicle.id,
                book.path().display()
            );
        }
        Action::Pending { json } => {
            let (book, _) = opts.open_reporting(&l, Access::Read)?;
            let pending = cagehand::logbook::pending(book.records());
            if *json {
                // The issue's contract: an array of pending detections.
                super::write_json(&mut out, &pending)?;
            } else if pending.is_empty() {
                writeln!(
                    out,
                    "no pending detections in the cage log of {} ({})",
                    l.profile.vehicle.id,
                    book.path().display()
                )?;
            } else {
                writeln!(
                    out,
                    "{} pending in the cage log of {} ({}):",
                    cagehand::text::count(pending.len(), "detection", "detections"),
                    l.profile.vehicle.id,
                    book.path().display()
                )?;
                for p in &pending {
                    let speed = match p.speed_m_per_s {
                        Some(v) => format!("{v:.1} m/s"),
                        None => "speed unknown".to_string(),
                    };
                    writeln!(
                        out,
                        "#{:<4} {}  {:>5.1} g  {:<5} {speed}  ({})",
                        p.seq, p.time, p.peak_g, p.face, p.source
                    )?;
                }
                let args = same_log_args(&l, opts);
                writeln!(
                    out,
                    "confirm: `cagehand log confirm SEQ{args}`; dismiss: `cagehand log dismiss SEQ --reason TEXT{args}`"
                )?;
            }
        }
        Action::Confirm {
            seq,
            face,
            node,
            peak_accel_g,
            speed,
            surface,
            note,
            json,
            ..
        } => {
            // Pre-fill from the detection (read now; checked again under the
            // write lock before anything is recorded).
            let (book, _) = opts.open_reporting(&l, Access::Read)?;
            check_pending(&book, *seq)?;
            let Some(d) = cagehand::logbook::detection::detection(book.records(), *seq).cloned()
            else {
                return Err(bad_input(format!("record #{seq} is not a detection")));
            };
            drop(book);
            let (face, node) = match (face, node) {
                (None, None) => (Some(d.face.clone()), None),
                other => (other.0.clone(), other.1.clone()),
            };
            // Neither given: the detection's own input, by the rule the
            // screens' form follows (`DetectionEvent::confirm_input`).
            let (peak_accel_g, speed) = match (peak_accel_g, speed) {
                (None, None) => match d.confirm_input() {
                    ConfirmInput::Speed(v) => (None, Some(v)),
                    ConfirmInput::PeakG(g) => (Some(g), None),
                },
                (g, v) => (*g, *v),
            };
            let impact_args = super::impact_cmd::Args {
                profile: super::ProfileArg {
                    profile: args.profile.clone(),
                },
                face,
                node,
                speed,
                peak_accel_g,
                surface: surface.clone(),
                contact_duration_s: None,
                dry_run: false,
                note: note.clone(),
                log: opts.clone(),
                json: *json,
            };
            drop(out);
            return super::impact_cmd::run_loaded(&impact_args, &l, Some(*seq));
        }
        Action::Dismiss { seq, reason, .. } => {
            if reason.trim().is_empty() {
                return Err(bad_input(
                    "--reason is empty: say why it was not a crash (e.g. \"hand launch\")",
                ));
            }
            let operator = opts.operator()?;
            let mut book = opts.open(&l, Access::Write)?;
            check_pending(&book, *seq)?;
            let v = cagehand::logwork::Vehicle {
                profile: &l.profile,
                cage: &l.cage,
            };
            let rec = cagehand::logwork::dismiss(
                v,
                &mut book,
                &operator,
                jiff::Timestamp::now(),
                *seq,
                reason,
            )
            .map_err(|e| match e {
                cagehand::logwork::WorkError::Store(s) => store_err(s),
                other => bad_input(other.to_string()),
            })?
            .record;
            writeln!(
                out,
                "detection #{seq} dismissed: record #{} in the cage log of {} ({})",
                rec.seq,
                l.profile.vehicle.id,
                book.path().display()
            )?;
        }
        Action::Verify { head, json } => {
            return verify(&mut out, &l, opts, head.as_deref(), *json);
        }
        Action::Export { format, out: path } => {
            let (book, report) = opts.open_reporting(&l, Access::Read)?;
            let note = trust_note(&report, &book);
            let h = assess(&l, book.records());
            let text = match format {
                ExportFormat::Md => {
                    let log_path = book.path().display().to_string();
                    let generated = cagehand::logbook::format_time(jiff::Timestamp::now());
                    let header = ReportHeader {
                        vehicle_id: &l.profile.vehicle.id,
                        vehicle_name: &l.profile.vehicle.name,
                        profile: &l.profile.source,
                        log_path: &log_path,
                        generated: &generated,
                        head: book.head(),
                        integrity: Some(&report.integrity),
                    };
                    let margin = super::margin_cmd::compute(
                        &l,
                        book.records(),
                        None,
                        cagehand::margin::Strikes::Faces,
                    )
                    .map_err(|e| format!("{e:#}"));
                    let md = export::markdown_with_margin(
                        &header,
                        book.records(),
                        &h,
                        Some(margin.as_ref().map_err(Clone::clone)),
                    );
                    match (&note, report.new_file) {
                        // The warning goes right under the title, where a
                        // reader of the printed report cannot miss it.
                        // (Integrity problems are placed there by the
                        // report itself.)
                        (Some(n), true) => match md.split_once('\n') {
                            Some((title, rest)) => format!(
                                "{title}\n\n> **Warning.** {}\n{rest}",
                                cagehand::text::markdown(n)
                            ),
                            None => {
                                format!("> **Warning.** {}\n\n{md}", cagehand::text::markdown(n))
                            }
                        },
                        _ => md,
                    }
                }
                ExportFormat::Csv => export::csv_with_records(
                    &h,
                    book.records(),
                    book.head(),
                    Some(&report.integrity),
                ),
            };
            match path {
                Some(p) => {
                    refuse_log_as_output(p, book.path())?;
                    write_file(p, text.as_bytes())?;
                    writeln!(out, "wrote {}", p.display())?;
                }
                None => out.write_all(text.as_bytes())?,
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// `log verify`: the whole chain, and a kept head when given. Exit 1 when
/// anything does not check (a script's `&&` stops there).
fn verify(
    out: &mut impl Write,
    l: &Loaded,
    opts: &LogOpts,
    head: Option<&str>,
    json: bool,
) -> anyhow::Result<ExitCode> {
    let kept: Option<ChainHead> = head
        .map(|h| h.parse::<ChainHead>().map_err(bad_input))
        .transpose()?;
    let (book, report) = opts.open_reporting(l, Access::Read)?;
    let integrity = &report.integrity;
    let kept_result = kept.as_ref().map(|k| (k, integrity.check_head(k)));
    let sound = !report.new_file
        && integrity.is_sound()
        && report.torn_tail.is_none()
        && kept_result.as_ref().is_none_or(|(_, r)| r.is_ok());
    if json {
        let j = VerifyJson {
            schema: "cagehand.log_verify/1",
            vehicle: &l.profile.vehicle.id,
            log: book.path().display().to_string(),
            exists: !report.new_file,
            records: book.records().len(),
            integrity: integrity_json(&book, integrity),
            kept_head: kept_result.as_ref().map(|(k, r)| KeptHeadJson {
                head: k.to_string(),
                matches: r.is_ok(),
                detail: match r {
                    Ok(s) | Err(s) => s.clone(),
                },
            }),
        };
        super::write_json(&mut *out, &j)?;
    } else {
        write_title(out, l, &book)?;
        if report.new_file {
            writeln!(out, "NOT VERIFIED: there is no cage log there")?;
        } else if let Some(h) = integrity.headline() {
            writeln!(out, "PROBLEMS: {h}")?;
            write_integrity(out, integrity)?;
        } else {
            writeln!(
                out,
                "chain: every record follows the one before it, none repeats, none is missing"
            )?;
        }
        for n in &integrity.notes {
            writeln!(out, "note: {}", terminal(n))?;
        }
        if integrity.unchained > 0 {
            writeln!(
                out,
                "note: the first {} written by format 1, before records were chained: a change to them shows only against a chain head kept from before the change",
                if integrity.unchained == 1 {
                    "record was".to_string()
                } else {
                    format!("{} records were", integrity.unchained)
                }
            )?;
        }
        if let Some((k, r)) = &kept_result {
            match r {
                Ok(s) => writeln!(out, "kept head {k}: matches; {s}")?,
                Err(s) => writeln!(out, "kept head {k}: DOES NOT MATCH: {s}")?,
            }
        }
    }
    Ok(if sound {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

/// An export never writes over a cage log: not the vehicle's own (by
/// name or as the same file through a link), not any `.cagelog` file or
/// its side files, and not any file that starts with a log's header. A
/// slip of `--out` would otherwise replace the records with a report.
fn refuse_log_as_output(out: &Path, log: &Path) -> anyhow::Result<()> {
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let same_file = match (std::fs::canonicalize(out), std::fs::canonicalize(log)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    };
    // Only a regular file is read (a FIFO would block the open).
    let regular = std::fs::metadata(out).is_ok_and(|m| m.is_file());
    let log_header = regular
        && std::fs::File::open(out)
            .and_then(|f| {
                use std::io::Read as _;
                let mut start = Vec::new();
                f.take(cagehand::logbook::format::MAGIC.len() as u64)
                    .read_to_end(&mut start)
                    .map(|_| start)
            })
            .is_ok_and(|start| start == cagehand::logbook::format::MAGIC.as_bytes());
    // A link (even one to a log not written yet) is judged by its target.
    let target_name = std::fs::read_link(out)
        .ok()
        .and_then(|t| t.file_name().map(|n| n.to_string_lossy().into_owned()));
    let log_name = |n: &str| {
        n.strip_suffix(cagehand::logbook::SIDE_FILE_SUFFIX)
            .unwrap_or(n)
            .ends_with(".cagelog")
    };
    if same_file || log_header || log_name(&name) || target_name.as_deref().is_some_and(log_name) {
        return Err(bad_input(format!(
            "--out {}: that is a cage log{}; an export never writes over a log (nothing was written): give the report another name",
            terminal(&out.display().to_string()),
            if same_file {
                " (the one this report is read from)"
            } else {
                ""
            }
        )));
    }
    Ok(())
}

fn write_file(p: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    let mut f =
        std::fs::File::create(p).with_context(|| format!("cannot create {}", p.display()))?;
    f.write_all(bytes)
        .and_then(|()| f.sync_data())
        .with_context(|| format!("cannot write {}", p.display()))?;
    Ok(())
}

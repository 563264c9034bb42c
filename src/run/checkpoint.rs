//! `checkpoint.bin`: everything a run needs to continue bit for bit (DESIGN §5).
//!
//! The file is `TINCTCKP` (8 bytes), the format version (`u32`, little-endian), the body's
//! length (`u64`, little-endian), the body, and the SHA-256 digest of the body (32 bytes). The
//! body is a [`Checkpoint`] in postcard encoding, which is not self-describing: one struct per
//! format version, and a change of any field's type or order is a new [`FORMAT_VERSION`].
//! Postcard writes `f64` as its eight bytes, so every number comes back bit for bit.
//!
//! A checkpoint belongs to one scenario and one tinct version: [`scenario_hash`] is the SHA-256
//! of the resolved scenario text and of every input file it names (land image, depth file,
//! flow file), and [`read`] refuses a file whose hash or version differs, saying which.
//!
//! What each piece is for (the march loop of [`crate::run::execute`] keeps exactly these):
//! - `sim`: the field, time, step, last step and Courant number, the budget's compensated
//!   running totals and the implicit counters ([`SimState`]);
//! - `rows`: the budget rows logged so far (`budget.csv`, the summary, the flushing fit);
//! - `receptors`: each receptor's running peak, arrival and time above, and the kept rows;
//! - `envelope`: the running maximum per cell; `exceedance`: each cell's spells above each
//!   threshold, the areas and their kept rows; `plume`: the first and last plume moments;
//! - `frame_records`: the fields written to `fields.nc` so far, so the resumed run writes the
//!   same file (the NetCDF file is rewritten whole when the run ends); their count is the
//!   number of the next frame;
//! - `dt_range`, `iterations`: the step-size range and the summed solver iterations and
//!   corrections of the summary; `wall_seconds`, `output_seconds`: the run's time so far (the
//!   summary's throughput counts the whole run);
//! - `threads`: the thread count the run's partitions were made for (see the field).

use crate::budget::BudgetRow;
use crate::flow::FlowKind;
use crate::output::{self, OutputError};
use crate::run::envelope::Envelope;
use crate::run::exceedance::Exceedance;
use crate::run::receptors::ReceptorLog;
use crate::run::summary::PlumeTrack;
use crate::scenario::Scenario;
use crate::step::SimState;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

/// The first eight bytes of every checkpoint.
pub const MAGIC: &[u8; 8] = b"TINCTCKP";

/// The layout of the body this tinct writes and reads.
pub const FORMAT_VERSION: u32 = 1;

/// The file name inside the output folder.
pub const FILE: &str = "checkpoint.bin";

/// Magic, format version and body length.
const HEADER_LEN: usize = 8 + 4 + 8;

/// The digest that closes the file.
const DIGEST_LEN: usize = 32;

/// One record of `fields.nc`: its time and the `nx * ny` interior values (row 0 south).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FrameRecord {
    /// Simulated time, s.
    pub time: f64,
    /// The field's interior, row-major.
    pub values: Vec<f64>,
}

/// The state of a run between two steps (format version [`FORMAT_VERSION`]).
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct Checkpoint {
    /// The tinct version that wrote it (`CARGO_PKG_VERSION`).
    pub tinct_version: String,
    /// [`scenario_hash`] of the scenario it was written for.
    pub scenario_hash: [u8; 32],
    /// That scenario's name (for messages).
    pub scenario_name: String,
    /// The simulation's marching state.
    pub sim: SimState,
    /// Budget rows logged so far.
    pub rows: Vec<BudgetRow>,
    /// Receptor statistics and kept rows.
    pub receptors: ReceptorLog,
    /// Largest value per cell so far.
    pub envelope: Envelope,
    /// Exceedance statistics (when a receptor has a threshold).
    pub exceedance: Option<Exceedance>,
    /// Plume moments at the frames so far.
    pub plume: PlumeTrack,
    /// The `fields.nc` records written so far (their count is the next frame's number).
    pub frame_records: Vec<FrameRecord>,
    /// Smallest and largest step so far, s.
    pub dt_range: (f64, f64),
    /// Linear-solver iterations and deferred corrections summed so far.
    pub iterations: (usize, usize),
    /// Wall seconds of the run so far.
    pub wall_seconds: f64,
    /// Of those, seconds spent writing outputs.
    pub output_seconds: f64,
    /// Rayon threads of the run (`rayon::current_num_threads`). The explicit kernel's row
    /// blocks, the solvers' blocked reductions and the transform solver's partition follow the
    /// thread count, so sums (side fluxes, decayed mass, Krylov inner products) round
    /// differently under another count: a resume continues bit for bit only in a pool of this
    /// many threads.
    pub threads: usize,
}

/// The leading fields of a [`Checkpoint`], decoded before the rest (postcard writes a struct's
/// fields one after the other, so these are a prefix of the body).
#[derive(serde::Deserialize)]
struct Leading {
    tinct_version: String,
    scenario_hash: [u8; 32],
    scenario_name: String,
}

impl Checkpoint {
    /// The number of frames written so far, which is the number of the next frame.
    pub fn frames_written(&self) -> usize {
        self.frame_records.len()
    }
}

/// Why a checkpoint cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum CheckpointError {
    /// The file or an input file of the scenario could not be read.
    #[error("cannot read {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// What the system said.
        #[source]
        source: std::io::Error,
    },
    /// The file does not start with [`MAGIC`].
    #[error("{path} is not a tinct checkpoint (it does not start with the checkpoint mark)")]
    NotACheckpoint {
        /// The file.
        path: PathBuf,
    },
    /// Another layout of the body.
    #[error("{path} is a checkpoint of format version {found}; this tinct reads format version {expected} only")]
    FormatVersion {
        /// The file.
        path: PathBuf,
        /// Its format version.
        found: u32,
        /// This tinct's.
        expected: u32,
    },
    /// Written by another tinct version.
    #[error("{path} was written by tinct {found}; this is tinct {expected}, which resumes only its own checkpoints (run the scenario again)")]
    TinctVersion {
        /// The file.
        path: PathBuf,
        /// The version that wrote it.
        found: String,
        /// This version.
        expected: String,
    },
    /// Written for another scenario (or the same one with other input files).
    #[error("{path} was written for scenario '{found}', not for the scenario '{expected}' in {scenario} as it is now: the scenario or one of its input files (land image, depth file, flow file) differs; run it again without --resume")]
    Scenario {
        /// The file.
        path: PathBuf,
        /// The name stored in the checkpoint.
        found: String,
        /// The name of the scenario it was checked against.
        expected: String,
        /// That scenario's file.
        scenario: PathBuf,
    },
    /// Truncated, altered or inconsistent.
    #[error("{path} is damaged: {what}")]
    Damaged {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        what: String,
    },
}

fn damaged(path: &Path, what: impl Into<String>) -> CheckpointError {
    CheckpointError::Damaged {
        path: path.to_path_buf(),
        what: what.into(),
    }
}

/// SHA-256 of the resolved scenario text and of the bytes of every input file it names (land
/// image, depth file, flow file), each preceded by its length, so that moving bytes from one
/// part to the next changes the digest.
pub fn scenario_hash(scn: &Scenario) -> Result<[u8; 32], CheckpointError> {
    let mut h = Sha256::new();
    let mut part = |bytes: &[u8]| {
        h.update((bytes.len() as u64).to_le_bytes());
        h.update(bytes);
    };
    part(scn.resolved_toml().as_bytes());
    let mut files: Vec<&Path> = Vec::new();
    files.extend(scn.land.as_deref());
    files.extend(scn.depth_file.as_ref().map(|(p, _)| p.as_path()));
    if let FlowKind::File(f) = &scn.model.flow.kind {
        files.push(&f.path);
    }
    for f in files {
        let bytes = std::fs::read(f).map_err(|source| CheckpointError::Io {
            path: f.to_path_buf(),
            source,
        })?;
        part(&bytes);
    }
    Ok(h.finalize().into())
}

/// The file's bytes: header, postcard body, digest. (Postcard fails only on types it cannot
/// encode, which a `Checkpoint` does not hold; the error is passed on rather than hidden.)
pub fn to_bytes(ck: &Checkpoint) -> Result<Vec<u8>, String> {
    let body = postcard::to_stdvec(ck).map_err(|e| format!("the checkpoint does not encode: {e}"))?;
    let mut out = Vec::with_capacity(HEADER_LEN + body.len() + DIGEST_LEN);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    out.extend_from_slice(&(body.len() as u64).to_le_bytes());
    out.extend_from_slice(&body);
    out.extend_from_slice(&Sha256::digest(&body));
    Ok(out)
}

/// Writes `ck` to `path` atomically (a synced temporary file renamed over the target), so an
/// interruption leaves the previous checkpoint or the new one, never a part.
pub fn write(path: &Path, ck: &Checkpoint) -> Result<(), OutputError> {
    let bytes = to_bytes(ck).map_err(|e| OutputError::invalid(path, e))?;
    output::write_atomic(path, &bytes)
}

/// Reads the checkpoint at `path` for `scn`: refuses another format, another tinct version,
/// another scenario (see [`scenario_hash`]) and a damaged file, each with its own message.
pub fn read(path: &Path, scn: &Scenario) -> Result<Checkpoint, CheckpointError> {
    let bytes = std::fs::read(path).map_err(|source| CheckpointError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    from_bytes(&bytes, path, scn)
}

/// [`read`] on bytes already in memory (`path` names them in messages).
pub fn from_bytes(bytes: &[u8], path: &Path, scn: &Scenario) -> Result<Checkpoint, CheckpointError> {
    if bytes.len() < MAGIC.len() || &bytes[..MAGIC.len()] != MAGIC {
        return Err(CheckpointError::NotACheckpoint {
            path: path.to_path_buf(),
        });
    }
    let Some(head) = bytes.get(..HEADER_LEN) else {
        return Err(damaged(
            path,
            format!("it ends after {} bytes, inside the header", bytes.len()),
        ));
    };
    let version = u32::from_le_bytes([head[8], head[9], head[10], head[11]]);
    if version != FORMAT_VERSION {
        return Err(CheckpointError::FormatVersion {
            path: path.to_path_buf(),
            found: version,
            expected: FORMAT_VERSION,
        });
    }
    let mut len8 = [0u8; 8];
    len8.copy_from_slice(&head[12..20]);
    let body_len = u64::from_le_bytes(len8);
    let expect = (HEADER_LEN as u64)
        .checked_add(body_len)
        .and_then(|n| n.checked_add(DIGEST_LEN as u64));
    if expect != Some(bytes.len() as u64) {
        return Err(damaged(
            path,
            format!(
                "it holds {} bytes where its header announces {} (truncated or extended)",
                bytes.len(),
                expect.map_or_else(|| "more than can exist".to_string(), |n| n.to_string())
            ),
        ));
    }
    let body = &bytes[HEADER_LEN..bytes.len() - DIGEST_LEN];
    if Sha256::digest(body).as_slice() != &bytes[bytes.len() - DIGEST_LEN..] {
        return Err(damaged(path, "its SHA-256 digest does not match its contents"));
    }
    let (lead, _) = postcard::take_from_bytes::<Leading>(body)
        .map_err(|e| damaged(path, format!("its leading fields do not decode ({e})")))?;
    let here = env!("CARGO_PKG_VERSION");
    if lead.tinct_version != here {
        return Err(CheckpointError::TinctVersion {
            path: path.to_path_buf(),
            found: lead.tinct_version,
            expected: here.to_string(),
        });
    }
    if lead.scenario_hash != scenario_hash(scn)? {
        return Err(CheckpointError::Scenario {
            path: path.to_path_buf(),
            found: lead.scenario_name,
            expected: scn.name.clone(),
            scenario: scn.path.clone(),
        });
    }
    let (ck, rest) = postcard::take_from_bytes::<Checkpoint>(body)
        .map_err(|e| damaged(path, format!("its body does not decode ({e})")))?;
    if !rest.is_empty() {
        return Err(damaged(path, format!("{} bytes follow its body", rest.len())));
    }
    check_sizes(&ck, scn).map_err(|what| damaged(path, what))?;
    Ok(ck)
}

/// Checks that every saved array has the size the scenario's grid gives it.
fn check_sizes(ck: &Checkpoint, scn: &Scenario) -> Result<(), String> {
    let g = &scn.model.grid;
    if ck.sim.c.len() != g.padded_len() {
        return Err(format!(
            "its field has {} values, the grid {} (padded)",
            ck.sim.c.len(),
            g.padded_len()
        ));
    }
    if ck.envelope.c_max.len() != g.cells() {
        return Err(format!(
            "its envelope has {} values, the grid {} cells",
            ck.envelope.c_max.len(),
            g.cells()
        ));
    }
    if ck.frame_records.len() > scn.run.frames + 1 {
        return Err(format!(
            "it holds {} frames, the run writes {}",
            ck.frame_records.len(),
            scn.run.frames + 1
        ));
    }
    if let Some(k) = ck.frame_records.iter().position(|r| r.values.len() != g.cells()) {
        return Err(format!("its frame {k} does not have the grid's {} cells", g.cells()));
    }
    if !ck.receptors.fits(g.padded_len()) || ck.receptors.stats().len() != scn.receptors.len() {
        return Err("its receptor log does not fit the scenario's receptors".into());
    }
    if ck.exceedance.as_ref().is_some_and(|e| !e.fits(g)) {
        return Err("its exceedance statistics do not fit the grid".into());
    }
    Ok(())
}

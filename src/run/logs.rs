//! The run's time series written as they go: `budget.csv`, `receptors.csv` and
//! `exceedance.csv` are opened at the start with their header, and every row is appended and
//! handed to the operating system at once, so a run that is killed keeps its series up to the
//! last row. The row formats are those of [`super::budget_csv`],
//! [`super::receptors::ReceptorLog::csv`] and [`super::exceedance::Exceedance::csv`], byte for
//! byte.

use super::exceedance::Exceedance;
use super::receptors::ReceptorLog;
use crate::budget::BudgetRow;
use crate::output::OutputError;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Seek, Write};
use std::path::{Path, PathBuf};

/// The header of `budget.csv` (DESIGN §5).
pub const BUDGET_HEADER: &str = "time,step,dt,mass,added,inflow,outflow,decayed,residual,min,max,courant\n";

/// One `budget.csv` row, with its newline.
pub fn budget_line(r: &BudgetRow) -> String {
    format!(
        "{:e},{},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e}\n",
        r.time, r.step, r.dt, r.mass, r.added, r.inflow, r.outflow, r.decayed, r.residual, r.min, r.max, r.courant
    )
}

/// A CSV file written row by row. Each row goes to the file in one write; a row that cannot be
/// written whole (disk full, file size limit) is cut off again, so the file always ends with a
/// complete row.
#[derive(Debug)]
pub struct CsvLog {
    path: PathBuf,
    file: File,
    /// Bytes of complete rows (header included).
    len: u64,
    /// Data rows written (header excluded).
    rows: usize,
}

impl CsvLog {
    /// Creates (or empties) `path` and writes `header` (one line, with its newline).
    pub fn create(path: &Path, header: &str) -> Result<Self, OutputError> {
        let file = OpenOptions::new()
            .write(true)
            .create(true)
            .truncate(true)
            .open(path)
            .map_err(|e| OutputError::io(path, e))?;
        let mut log = CsvLog {
            path: path.to_path_buf(),
            file,
            len: 0,
            rows: 0,
        };
        log.write_whole(header)?;
        Ok(log)
    }

    /// Opens an existing log to continue it after its first `rows` data rows: anything after
    /// them (rows of a later time than a checkpoint, a cut-off line) is removed.
    pub fn truncate_to(path: &Path, rows: usize) -> Result<Self, OutputError> {
        let io = |e| OutputError::io(path, e);
        let file = OpenOptions::new().read(true).write(true).open(path).map_err(io)?;
        let mut reader = BufReader::new(&file);
        let mut line = String::new();
        let mut len = 0u64;
        for k in 0..=rows {
            line.clear();
            let n = reader.read_line(&mut line).map_err(io)?;
            if n == 0 || !line.ends_with('\n') {
                let what = if k == 0 {
                    "no header".to_string()
                } else {
                    format!("{} rows", k - 1)
                };
                return Err(OutputError::invalid(path, format!("holds {what}, expected {rows}")));
            }
            len += n as u64;
        }
        drop(reader);
        file.set_len(len).map_err(io)?;
        let mut file = file;
        file.seek(std::io::SeekFrom::Start(len)).map_err(io)?;
        Ok(CsvLog {
            path: path.to_path_buf(),
            file,
            len,
            rows,
        })
    }

    /// Appends one row (`line` ends with its newline).
    pub fn append_row(&mut self, line: &str) -> Result<(), OutputError> {
        self.write_whole(line)?;
        self.rows += 1;
        Ok(())
    }

    /// Data rows written so far.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Syncs the data to disk (at checkpoints and at the end of the run).
    pub fn sync(&self) -> Result<(), OutputError> {
        self.file.sync_data().map_err(|e| OutputError::io(&self.path, e))
    }

    fn write_whole(&mut self, text: &str) -> Result<(), OutputError> {
        if let Err(e) = self.file.write_all(text.as_bytes()) {
            // Cut off what part of the row went out; the file ends with a complete row again.
            let _ = self.file.set_len(self.len);
            let _ = self.file.seek(std::io::SeekFrom::Start(self.len));
            return Err(OutputError::io(&self.path, e));
        }
        self.len += text.len() as u64;
        Ok(())
    }
}

/// The three logs of a run.
#[derive(Debug)]
pub struct RunLogs {
    budget: CsvLog,
    receptors: CsvLog,
    exceedance: Option<CsvLog>,
}

impl RunLogs {
    /// Creates `budget.csv`, `receptors.csv` and (with thresholds) `exceedance.csv` in `dir`
    /// holding the rows kept so far.
    pub fn create(
        dir: &Path,
        rows: &[BudgetRow],
        receptors: &ReceptorLog,
        exceed: Option<&Exceedance>,
    ) -> Result<Self, OutputError> {
        let mut budget = CsvLog::create(&dir.join("budget.csv"), BUDGET_HEADER)?;
        for r in rows {
            budget.append_row(&budget_line(r))?;
        }
        let receptors = start(&dir.join("receptors.csv"), &receptors.csv_header(), &receptors.csv())?;
        let exceedance = exceed
            .map(|e| start(&dir.join("exceedance.csv"), &e.csv_header(), &e.csv()))
            .transpose()?;
        Ok(RunLogs {
            budget,
            receptors,
            exceedance,
        })
    }

    /// Appends the last kept row of each log.
    pub fn append_last(
        &mut self,
        row: &BudgetRow,
        receptors: &ReceptorLog,
        exceed: Option<&Exceedance>,
    ) -> Result<(), OutputError> {
        self.budget.append_row(&budget_line(row))?;
        if let Some(line) = receptors.last_csv_row() {
            self.receptors.append_row(&line)?;
        }
        if let (Some(log), Some(line)) = (self.exceedance.as_mut(), exceed.and_then(|e| e.last_csv_row())) {
            log.append_row(&line)?;
        }
        Ok(())
    }

    /// Syncs every log to disk.
    pub fn sync(&self) -> Result<(), OutputError> {
        self.budget.sync()?;
        self.receptors.sync()?;
        self.exceedance.as_ref().map_or(Ok(()), CsvLog::sync)
    }
}

/// A log with `header` and the rows of the whole-file text `whole` (header first).
fn start(path: &Path, header: &str, whole: &str) -> Result<CsvLog, OutputError> {
    let mut log = CsvLog::create(path, header)?;
    for line in whole.split_inclusive('\n').skip(1) {
        log.append_row(line)?;
    }
    Ok(log)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_are_appended_and_truncated_to_a_count() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("log.csv");
        let mut log = CsvLog::create(&p, "a,b\n").unwrap();
        for k in 0..4 {
            log.append_row(&format!("{k},{}\n", k * 2)).unwrap();
        }
        assert_eq!(log.rows(), 4);
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n0,0\n1,2\n2,4\n3,6\n");
        drop(log);
        // A cut-off line after the rows is removed with the later rows.
        std::fs::OpenOptions::new()
            .append(true)
            .open(&p)
            .unwrap()
            .write_all(b"4,")
            .unwrap();
        let mut log = CsvLog::truncate_to(&p, 2).unwrap();
        log.append_row("9,9\n").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n0,0\n1,2\n9,9\n");
        let err = CsvLog::truncate_to(&p, 7).unwrap_err().to_string();
        assert!(err.contains("log.csv") && err.contains("3 rows"), "{err}");
    }

    #[test]
    fn a_created_log_replaces_an_old_file() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("budget.csv");
        std::fs::write(&p, "old,old,old\n1,2,3\n4,5,6\n").unwrap();
        let log = CsvLog::create(&p, BUDGET_HEADER).unwrap();
        log.sync().unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), BUDGET_HEADER);
    }

    #[test]
    fn appended_logs_equal_the_whole_file_writers() {
        use crate::grid::Grid;
        let grid = Grid::new(6, 4, 10.0, 10.0, 0.0, 0.0).unwrap();
        let n = grid.padded_len();
        let wet = vec![true; 6 * 4];
        let recs = vec![
            ("a, \"quoted\"".to_string(), (15.0, 15.0), Some(0.5)),
            ("b".to_string(), (45.0, 25.0), None),
        ];
        let named: Vec<(String, Option<f64>)> = recs.iter().map(|(n, _, t)| (n.clone(), *t)).collect();
        let mut c = vec![0.0; n];
        let mut receptors = ReceptorLog::new(&grid, &recs).unwrap();
        let mut exceed = Exceedance::new(&grid, &wet, &named, 0.0, &c);
        assert!(exceed.is_some());
        receptors.record(0.0, 0.0, &c);
        let mut rows = vec![sample_row(0.0, 0)];
        let d = tempfile::tempdir().unwrap();
        let mut logs = RunLogs::create(d.path(), &rows, &receptors, exceed.as_ref()).unwrap();
        for k in 1..5 {
            let t = k as f64 * 1.25;
            c.iter_mut().enumerate().for_each(|(p, v)| *v = (p * k) as f64 * 0.037);
            receptors.sample(t, 1.25, &c);
            receptors.keep_row(t, &c);
            let e = exceed.as_mut().unwrap();
            e.observe(&grid, &c, t);
            e.keep_row(t);
            let row = sample_row(t, k as u64);
            rows.push(row);
            logs.append_last(&row, &receptors, exceed.as_ref()).unwrap();
        }
        logs.sync().unwrap();
        let read = |f: &str| std::fs::read_to_string(d.path().join(f)).unwrap();
        assert_eq!(read("budget.csv"), super::super::budget_csv(&rows));
        assert_eq!(read("receptors.csv"), receptors.csv());
        assert_eq!(read("exceedance.csv"), exceed.unwrap().csv());
        assert_eq!(read("receptors.csv").lines().count(), 6);
        assert!(read("receptors.csv").starts_with("time,\"a, \"\"quoted\"\"\",b\n"));
    }

    fn sample_row(time: f64, step: u64) -> BudgetRow {
        BudgetRow {
            time,
            step,
            dt: 0.5,
            mass: 2.0 / (1.0 + time),
            added: 0.0,
            inflow: 1e-3,
            outflow: -2e-7,
            decayed: 0.25 * time,
            residual: 1e-17,
            min: 0.0,
            max: 1.0,
            courant: 0.8,
        }
    }

    #[test]
    fn budget_lines_match_the_whole_file_writer() {
        let row = sample_row(1.5, 3);
        let rows = [row, row];
        let whole = super::super::budget_csv(&rows);
        assert_eq!(
            whole,
            format!("{BUDGET_HEADER}{}{}", budget_line(&row), budget_line(&row))
        );
    }
}

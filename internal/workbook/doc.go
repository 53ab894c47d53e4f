// Package workbook reads exams from .xlsx workbooks and writes veer's
// screening back into them, so that a manager who never opens the add-in
// can bring the screening of a workbook up to date with one command.
//
// ReadSheet reads a sheet whose first row names the columns into a
// table.Table, the same type veer reads CSV files into.
//
// Refresh writes two sheets into an existing workbook, replacing them if
// they are there: "veer results" (the input columns and, per marker, z,
// centile, chart statistic, limit, signal, first signal and one column per
// alert rule, with the exam rows that flag highlighted) and "veer summary"
// (one row per worker with ages and years as number cells, flagged workers
// first in flagged.ByUrgency order and highlighted, the counts of flagged
// workers, chart signals and rules fired per marker, and a native bar chart
// of the years from first exam to first signal). "Flagged" is package
// flagged's one definition: a chart signal, or a rule of severity high.
// Every other sheet, formula and style of the workbook is left as it was.
//
// The file is replaced atomically: the new workbook is written to a
// temporary file in the same folder, flushed to disk and renamed over the
// old one, so a crash leaves either the old or the new workbook, never a
// half-written one. The previous workbook is kept beside it as a backup
// named NAME.bak.xlsx (for screening.xlsx: screening.bak.xlsx), which opens
// in a spreadsheet program like any workbook; each refresh replaces the
// previous backup. A workbook that is open in LibreOffice or Excel (their
// lock files .~lock.NAME# and ~$NAME lie beside it) or that cannot be written
// is refused with a clear error before anything is written.
//
// Screening is an aid: a signal prompts review by a licensed clinician
// under local occupational-health rules; it is not a diagnosis. The summary
// sheet says so.
package workbook

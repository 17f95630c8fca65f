// Package ingest reads legacy text logs and writes trajectory files in the
// trajvault layout: generic readers (XYZ, extended XYZ, column tables,
// recipe-described line logs) that stream one record at a time and report
// bad input with file, line and column; Discover, which finds the
// trajectories of an ensemble; Scan, a first pass that records printed
// precision, restarts and problems; TrajReport.Refusal, the one rule that
// decides whether a scanned trajectory may be converted; and Convert, a
// second pass that writes numbers exactly at their printed precision.
package ingest

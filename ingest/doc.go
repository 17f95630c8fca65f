// Package ingest reads legacy text logs and writes trajectory files in the
// trajvault layout: generic readers (XYZ, extended XYZ, column tables,
// recipe-described line logs), registered in one list (readers) with a
// kind and a role, that stream one record at a time and report bad input
// with file, line and column; Discover, which finds the trajectories of
// an ensemble; Scan, a first pass that records printed precision,
// restarts and problems (finding.Finding, codes P1..P14);
// TrajReport.Refusal, the one rule that decides whether a scanned
// trajectory may be converted; and Convert, a second pass that
// writes numbers exactly at their printed precision, replaying the
// records the scan spooled (Options.SpoolDir) instead of parsing again. ScanAll and
// ConvertAll run many trajectories under one context, a limited number at
// once, the first error cancelling the rest. Names of quantities and
// unit kinds come from internal/quantity.
package ingest
